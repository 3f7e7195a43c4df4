//! Converter templates: a [`ForwardDesign`] expands into an engine [`Circuit`] with
//! named probes, the gate-driven switches, and the elements a run and its measurements refer to.
//!
//! Node and probe names are this project's own dotted form `part.quantity`
//! (`drain.v`, `mag.i`, `core.b`, `out.v` …). All templates share the input stage,
//! the transformer core and the secondary/output stage; only the primary switch and
//! reset arrangement differs ([`ResetScheme`]).

mod net;
mod primary;

use stepflux_engine::{Circuit, ElementId, Signal};

use crate::components::{Capacitor, Diode, Inductor, InputSource, Load, Switch, Transformer};
use crate::error::ModelError;

pub use net::Net;

/// How the core is reset while the switch is off.
#[derive(Clone, Debug, PartialEq)]
pub enum ResetScheme {
    /// Single switch with a reset (tertiary) winding and diode back to the input.
    ResetWinding {
        /// The reset diode.
        diode: Diode,
    },
    /// Single switch with a resistor–capacitor–diode clamp from the drain to the input.
    RcdClamp {
        /// Clamp diode.
        diode: Diode,
        /// Clamp resistor, ohms.
        resistance: f64,
        /// Clamp capacitor.
        capacitor: Capacitor,
        /// Clamp capacitor voltage at t = 0, volts.
        initial_voltage: f64,
    },
    /// Two switches (high and low side) and two clamp diodes to the input rail.
    TwoSwitch {
        /// High-side switch (gated with the main switch).
        high_side: Switch,
        /// Each of the two clamp diodes.
        clamp_diode: Diode,
    },
    /// Auxiliary switch and clamp capacitor from the drain to the input, gated
    /// complementary to the main switch with dead time.
    ActiveClamp {
        /// Auxiliary switch.
        aux_switch: Switch,
        /// Clamp capacitor.
        capacitor: Capacitor,
        /// Clamp capacitor voltage at t = 0, volts.
        initial_voltage: f64,
    },
}

impl ResetScheme {
    /// The scenario's choice name for this scheme, used in messages and `check`.
    pub fn name(&self) -> &'static str {
        match self {
            ResetScheme::ResetWinding { .. } => "reset_winding",
            ResetScheme::RcdClamp { .. } => "rcd_clamp",
            ResetScheme::TwoSwitch { .. } => "two_switch",
            ResetScheme::ActiveClamp { .. } => "active_clamp",
        }
    }
}

/// A forward converter's power stage as a designer specifies it.
#[derive(Clone, Debug, PartialEq)]
pub struct ForwardDesign {
    /// Input source.
    pub input: InputSource,
    /// Transformer.
    pub transformer: Transformer,
    /// Main (low-side) primary switch.
    pub switch: Switch,
    /// Reset arrangement.
    pub reset: ResetScheme,
    /// Forward rectifier diode.
    pub rectifier: Diode,
    /// Freewheel diode.
    pub freewheel: Diode,
    /// Output inductor.
    pub output_inductor: Inductor,
    /// Output capacitor.
    pub output_capacitor: Capacitor,
    /// Load.
    pub load: Load,
}

/// SI unit symbol of a probe, for outputs (`src/units.rs` parses units from text;
/// this is only the symbol written beside a value).
pub type UnitSymbol = &'static str;

/// Every unit symbol a probe carries ("1" for a dimensionless block state), so a
/// figure read back from JSON gets its unit from this list, not from a guess; a test
/// builds the demo power stage and checks its probes against it.
pub const PROBE_UNITS: [UnitSymbol; 7] = ["V", "A", "T", "W", "J", "s", "1"];

/// A named probe: what to observe and its unit.
#[derive(Clone, Debug, PartialEq)]
pub struct Probe {
    /// Dotted name, e.g. `drain.v`.
    pub name: String,
    /// The quantity.
    pub signal: Signal,
    /// SI unit symbol.
    pub unit: UnitSymbol,
}

/// The two-slope saturation branch: an extra inductor switched in parallel with the
/// magnetising inductance while |i_m| exceeds the knee current.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SaturationBranch {
    /// The magnetising inductor whose current tracks the flux.
    pub magnetising: ElementId,
    /// Switch that closes above +knee.
    pub positive: ElementId,
    /// Switch that closes below −knee.
    pub negative: ElementId,
    /// Knee current, amperes.
    pub knee: f64,
}

/// Elements a run (`job::run`) and the measurements refer to.
#[derive(Clone, Debug, PartialEq)]
pub struct KeyElements {
    /// Switches turned on and off together by the main gate.
    pub main_switches: Vec<ElementId>,
    /// Switch gated complementary to the main gate (active clamp).
    pub aux_switch: Option<ElementId>,
    /// Magnetising inductor.
    pub magnetising: ElementId,
    /// Reset-path diode(s) whose conduction ends the reset interval.
    pub reset_diodes: Vec<ElementId>,
    /// Forward rectifier.
    pub rectifier: ElementId,
    /// Freewheel diode.
    pub freewheel: ElementId,
    /// Output inductor.
    pub output_inductor: ElementId,
    /// Input voltage source.
    pub input_source: ElementId,
    /// Load current sink (0 A when the design has none).
    pub load_sink: ElementId,
    /// Switch in series with the load resistor, if there is one.
    pub load_switch: Option<ElementId>,
    /// Saturation branch, if saturation is modelled.
    pub saturation: Option<SaturationBranch>,
}

/// A design expanded into an engine circuit.
#[derive(Clone, Debug)]
pub struct Converter {
    /// The circuit.
    pub circuit: Circuit,
    /// Named probes, in a fixed order (see [`probe_names`](Converter::probe_index)).
    pub probes: Vec<Probe>,
    /// Elements of interest.
    pub key: KeyElements,
    /// The design it came from.
    pub design: ForwardDesign,
}

impl Converter {
    /// Position of a probe by name.
    pub fn probe_index(&self, name: &str) -> Option<usize> {
        self.probes.iter().position(|p| p.name == name)
    }
}

impl ForwardDesign {
    /// Checks every value, with the field path in the error.
    pub fn validate(&self) -> Result<(), ModelError> {
        use crate::components::{non_negative, positive};
        positive("input.voltage", self.input.voltage)?;
        non_negative("input.resistance", self.input.resistance)?;
        self.transformer.validate()?;
        self.switch.validate("switch")?;
        self.rectifier.validate("rectifier")?;
        self.freewheel.validate("freewheel")?;
        positive(
            "output_inductor.inductance",
            self.output_inductor.inductance,
        )?;
        non_negative("output_inductor.dcr", self.output_inductor.dcr)?;
        positive(
            "output_capacitor.capacitance",
            self.output_capacitor.capacitance,
        )?;
        non_negative("output_capacitor.esr", self.output_capacitor.esr)?;
        if let Some(r) = self.load.resistance {
            positive("load.resistance", r)?;
        }
        if let Some(i) = self.load.current {
            non_negative("load.current", i)?;
        }
        match &self.reset {
            ResetScheme::ResetWinding { diode } => {
                diode.validate("reset.diode")?;
                positive("transformer.reset_turns", self.transformer.reset_turns)
            }
            ResetScheme::RcdClamp {
                diode,
                resistance,
                capacitor,
                ..
            } => {
                diode.validate("reset.diode")?;
                positive("reset.resistance", *resistance)?;
                positive("reset.capacitor.capacitance", capacitor.capacitance)
            }
            ResetScheme::TwoSwitch {
                high_side,
                clamp_diode,
            } => {
                high_side.validate_other("reset.high_side")?;
                clamp_diode.validate("reset.clamp_diode")
            }
            ResetScheme::ActiveClamp {
                aux_switch,
                capacitor,
                ..
            } => {
                aux_switch.validate_other("reset.aux_switch")?;
                positive("reset.capacitor.capacitance", capacitor.capacitance)
            }
        }
    }

    /// Expands the design into a circuit.
    pub fn build(&self) -> Result<Converter, ModelError> {
        self.validate()?;
        let mut net = Net::new();
        let input = net.input_stage(&self.input)?;
        let stage = primary::build(&mut net, self, input.node)?;
        let out = net.output_stage(self, stage.secondary_dot)?;
        let key = KeyElements {
            main_switches: stage.main_switches,
            aux_switch: stage.aux_switch,
            magnetising: stage.magnetising,
            reset_diodes: stage.reset_diodes,
            rectifier: out.rectifier,
            freewheel: out.freewheel,
            output_inductor: out.inductor,
            input_source: input.source,
            load_sink: out.load_sink,
            load_switch: out.load_switch,
            saturation: stage.saturation,
        };
        let mut probes = net.take_probes();
        probes.extend(stage.probes);
        Ok(Converter {
            circuit: net.into_circuit(),
            probes,
            key,
            design: self.clone(),
        })
    }
}

#[cfg(test)]
mod unit_tests {
    use super::PROBE_UNITS;

    /// A probe whose unit is missing from the list would be read back from JSON
    /// as dimensionless: the list must cover every probe a template makes.
    #[test]
    fn every_probe_unit_is_listed() {
        let converter = crate::demo_design::demo_design()
            .build()
            .expect("demo builds");
        assert!(!converter.probes.is_empty());
        for p in &converter.probes {
            assert!(PROBE_UNITS.contains(&p.unit), "{}: {:?}", p.name, p.unit);
        }
    }
}
