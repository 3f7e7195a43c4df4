//! Energy meters of a converter, one per element that exchanges energy, grouped by
//! element class; and the energy stored in its inductors and capacitors.
//!
//! Each meter is the exact integral ∫ v·i dt of one element (the engine's quadratic
//! meters, integrated with the matrix exponential, not sampled), v = v(a) − v(b) and i
//! the current a → b through it, so it is the energy the element absorbed. The input
//! source's meter is negated: the energy it delivered. By Tellegen's theorem the
//! absorbed energies of all elements of a circuit sum to zero, so over any interval
//!
//!   E_in = E_out + Σ losses + ΔE_stored,
//!
//! with ΔE_stored = Δ(Σ ½·L·i² + Σ ½·C·v²) read from the state at the two instants.
//! The controller's own circuit (elements named `ctl.*`) is left out except its
//! feedback divider, the one part of it the power stage feeds.

use stepflux_engine::{ElementId, ElementKind, Meter, Quantity, Signal, Simulation};

use crate::error::ModelError;
use crate::template::Converter;

/// Where a meter's energy goes in the account.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum LossClass {
    /// Energy delivered by the input source `vin`.
    Input,
    /// Energy absorbed by the load: load resistors, their branch switches, the
    /// current sink.
    Output,
    /// Primary switches `sw`, `sw.hi`, `aux` (channel v·i, which includes the
    /// discharge of their output capacitance at turn-on), and in a [`super::LossReport`]
    /// the main switch's modelled transition loss.
    Switch,
    /// Every diode of the power stage: rectifier, freewheel, reset, clamp, body.
    Diode,
    /// Winding resistances `pri.r`, `sec.r`, `rst.r`.
    Winding,
    /// Output inductor resistance `lout.dcr`.
    InductorDcr,
    /// Capacitor series resistances `*.esr`.
    CapacitorEsr,
    /// RCD clamp resistor `clamp.r`.
    ClampResistor,
    /// Source resistance and input filter resistance.
    InputStage,
    /// The controller's output voltage divider.
    FeedbackDivider,
    /// Switches of the saturation knee model, and in a [`super::LossReport`] the
    /// modelled Steinmetz core loss.
    Core,
    /// Anything else in the power stage.
    Other,
}

impl LossClass {
    /// Short name for figures.
    pub fn name(self) -> &'static str {
        match self {
            LossClass::Input => "input",
            LossClass::Output => "output",
            LossClass::Switch => "switch",
            LossClass::Diode => "diode",
            LossClass::Winding => "winding",
            LossClass::InductorDcr => "inductor_dcr",
            LossClass::CapacitorEsr => "capacitor_esr",
            LossClass::ClampResistor => "clamp_resistor",
            LossClass::InputStage => "input_stage",
            LossClass::FeedbackDivider => "feedback_divider",
            LossClass::Core => "core",
            LossClass::Other => "other",
        }
    }

    /// Whether the class is a loss (not the input or the output).
    pub fn is_loss(self) -> bool {
        !matches!(self, LossClass::Input | LossClass::Output)
    }

    /// Every class, in report order.
    pub const ALL: [LossClass; 12] = [
        LossClass::Input,
        LossClass::Output,
        LossClass::Switch,
        LossClass::Diode,
        LossClass::Winding,
        LossClass::InductorDcr,
        LossClass::CapacitorEsr,
        LossClass::ClampResistor,
        LossClass::InputStage,
        LossClass::FeedbackDivider,
        LossClass::Core,
        LossClass::Other,
    ];
}

/// One metered element.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Entry {
    /// Element name.
    pub(crate) element: String,
    /// Meter name in the simulation.
    pub(crate) meter: String,
    pub(crate) class: LossClass,
    sign: f64,
    id: ElementId,
}

/// An energy-storing element: ½·value·x², x its state.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Store {
    id: ElementId,
    value: f64,
}

/// The energy account of one converter: which meters to add to its run and how to read
/// them.
#[derive(Clone, Debug, PartialEq)]
pub struct LossMeters {
    pub(crate) entries: Vec<Entry>,
    stores: Vec<Store>,
    coss: f64,
}

/// Meter readings and stored energy at one instant.
#[derive(Clone, Debug, PartialEq)]
pub struct EnergySnapshot {
    /// Seconds.
    pub time: f64,
    /// Energy per metered element (joules, absorbed; delivered for the input), in the
    /// order of [`LossMeters::elements`].
    pub energies: Vec<f64>,
    /// Energy stored in the power stage's inductors and capacitors, joules.
    pub stored: f64,
}

/// Prefix of the meters' names.
const PREFIX: &str = "energy.";

fn classify(name: &str, kind: &ElementKind) -> Option<LossClass> {
    use ElementKind as K;
    if name.starts_with("ctl.") {
        let divider =
            matches!(kind, K::Resistor { .. }) && (name == "ctl.rtop" || name == "ctl.rbot");
        return divider.then_some(LossClass::FeedbackDivider);
    }
    Some(match kind {
        K::Inductor { .. } | K::Capacitor { .. } | K::Transformer { .. } => return None,
        K::Diode { .. } => LossClass::Diode,
        K::Switch { .. } if name.starts_with("load.") => LossClass::Output,
        K::Switch { .. } if name.starts_with("sat.") => LossClass::Core,
        K::Switch { .. } => LossClass::Switch,
        K::Resistor { .. } => resistor_class(name),
        K::VoltageSource { .. } if name == "vin" => LossClass::Input,
        K::CurrentSource { .. } if name == "load.i" => LossClass::Output,
        _ => LossClass::Other,
    })
}

fn resistor_class(name: &str) -> LossClass {
    match name {
        n if n.starts_with("load.") => LossClass::Output,
        "pri.r" | "sec.r" | "rst.r" => LossClass::Winding,
        "lout.dcr" => LossClass::InductorDcr,
        n if n.ends_with(".esr") => LossClass::CapacitorEsr,
        "clamp.r" => LossClass::ClampResistor,
        n if n == "vin.r" || n.starts_with("filt.") => LossClass::InputStage,
        _ => LossClass::Other,
    }
}

impl LossMeters {
    /// The account of `conv` (a built power stage, or the circuit a closed loop
    /// simulates: controller parts and disturbance branches are recognised by name).
    pub fn new(conv: &Converter) -> Result<Self, ModelError> {
        let mut entries = Vec::new();
        let mut stores = Vec::new();
        for (k, e) in conv.circuit.elements().iter().enumerate() {
            let Some(id) = conv.circuit.find_element(&e.name) else {
                return Err(ModelError::Infeasible(format!(
                    "element #{k} '{}' cannot be found by its name",
                    e.name
                )));
            };
            match e.kind {
                ElementKind::Inductor { henries, .. } if !e.name.starts_with("ctl.") => {
                    stores.push(Store { id, value: henries })
                }
                ElementKind::Capacitor { farads, .. } if !e.name.starts_with("ctl.") => {
                    stores.push(Store { id, value: farads })
                }
                _ => {}
            }
            if let Some(class) = classify(&e.name, &e.kind) {
                entries.push(Entry {
                    element: e.name.clone(),
                    meter: format!("{PREFIX}{}", e.name),
                    class,
                    sign: if class == LossClass::Input { -1.0 } else { 1.0 },
                    id,
                });
            }
        }
        if !entries.iter().any(|e| e.class == LossClass::Input) {
            return Err(ModelError::Infeasible(
                "energy account: the converter has no input source 'vin'".into(),
            ));
        }
        Ok(LossMeters {
            entries,
            stores,
            coss: conv.design.switch.output_capacitance,
        })
    }

    /// Engine meters to add to the run: ±∫ v·i dt of each element.
    pub fn meters(&self) -> Vec<Meter> {
        self.entries
            .iter()
            .map(|e| Meter {
                name: e.meter.clone(),
                terms: vec![(
                    e.sign,
                    Signal::of(Quantity::Voltage(e.id)),
                    Signal::of(Quantity::Current(e.id)),
                )],
            })
            .collect()
    }

    /// Metered elements and their classes, in snapshot order.
    pub fn elements(&self) -> impl Iterator<Item = (&str, LossClass)> {
        self.entries.iter().map(|e| (e.element.as_str(), e.class))
    }

    /// Output capacitance of the main switch, farads (for [`super::CossTurnOn`]).
    pub fn main_switch_coss(&self) -> f64 {
        self.coss
    }

    /// Reads the meters (found by name among the run's meters) and the stored energy.
    pub fn snapshot(&self, sim: &Simulation) -> Result<EnergySnapshot, ModelError> {
        let names = &sim.system().observation().meters;
        let values = sim.meters();
        let energies = self
            .entries
            .iter()
            .map(|e| {
                names
                    .iter()
                    .position(|m| m.name == e.meter)
                    .and_then(|k| values.get(k).copied())
                    .ok_or_else(|| {
                        ModelError::Infeasible(format!(
                            "the run has no meter '{}' (pass LossMeters::meters to it)",
                            e.meter
                        ))
                    })
            })
            .collect::<Result<Vec<f64>, ModelError>>()?;
        let layout = sim.system().layout();
        let z = sim.state();
        let mut stored = 0.0;
        for s in &self.stores {
            let x = layout.state_of[s.id.index()]
                .map(|k| z[k])
                .ok_or_else(|| ModelError::Infeasible("a storage element has no state".into()))?;
            stored += 0.5 * s.value * x * x;
        }
        Ok(EnergySnapshot {
            time: sim.time(),
            energies,
            stored,
        })
    }
}
