//! Error amplifiers as circuit elements: a single-pole transconductance macromodel with
//! clamped internal node, and the compensation network around it.
//!
//! Macromodel: a current gm·(v+ − v−) into an internal node loaded by Ro ‖ Co gives a DC
//! gain gm·Ro and a gain-bandwidth gm/(2π·Co) — the dominant-pole op-amp model
//! (Sedra & Smith, *Microelectronic Circuits*, ch. on op-amp frequency response). Two
//! ideal-threshold diodes clamp the internal node to the output limits, so the stored
//! state cannot run past them: the clamp does not wind up. A unity buffer drives the
//! output node.
//!
//! Compensation sits between the output and the inverting input, with the reference
//! behind the input impedance and the sensed signal at the non-inverting input, so the
//! output rises when the sensed signal rises above the reference (the controller's
//! "higher control voltage, less duty" convention). With an ideal amplifier,
//! out = v+ + (Zf/Zi)·(v+ − ref).

use stepflux_engine::{DiodeParams, NodeId, Quantity, Signal};

use crate::components::positive;
use crate::error::ModelError;
use crate::template::Net;

/// Amplifier limits as a designer reads them from a data sheet.
#[derive(Clone, Debug, PartialEq)]
pub struct Amplifier {
    /// Open-loop DC gain, V/V.
    pub dc_gain: f64,
    /// Gain-bandwidth product, hertz.
    pub gain_bandwidth: f64,
    /// Lowest output, volts.
    pub output_low: f64,
    /// Highest output, volts.
    pub output_high: f64,
}

/// The compensation network, as component values of the classic type I, II and III
/// networks, or as the integrator, zero and pole frequencies those networks realise.
#[derive(Clone, Debug, PartialEq)]
pub enum Compensation {
    /// Integrator: R1 in, C1 in feedback. K(s) = 1/(s·R1·C1).
    TypeI {
        /// Input resistor, ohms.
        r1: f64,
        /// Feedback capacitor, farads.
        c1: f64,
    },
    /// Integrator, one zero, one pole: R1 in; feedback R2 + C1 in series, C2 across.
    TypeII {
        /// Input resistor, ohms.
        r1: f64,
        /// Feedback resistor, ohms.
        r2: f64,
        /// Feedback series capacitor, farads.
        c1: f64,
        /// Feedback parallel capacitor, farads.
        c2: f64,
    },
    /// Integrator, two zeros, two poles: type II feedback, and R3 + C3 across R1.
    TypeIII {
        /// Input resistor, ohms.
        r1: f64,
        /// Feedback resistor, ohms.
        r2: f64,
        /// Input-branch resistor in series with C3, ohms.
        r3: f64,
        /// Feedback series capacitor, farads.
        c1: f64,
        /// Feedback parallel capacitor, farads.
        c2: f64,
        /// Input-branch capacitor, farads.
        c3: f64,
    },
    /// Integrator crossover `integrator_hz` (|K| = 1 there when no zero intervenes),
    /// with zero to two zeros and as many poles (hertz), realised as type I, II or III
    /// around an input resistor `r1`.
    PolesZeros {
        /// Input resistor to realise with, ohms.
        r1: f64,
        /// Integrator unity-gain frequency, hertz.
        integrator_hz: f64,
        /// Zero frequencies, hertz.
        zeros_hz: Vec<f64>,
        /// Pole frequencies (besides the origin), hertz.
        poles_hz: Vec<f64>,
    },
}

const TAU: f64 = 2.0 * std::f64::consts::PI;

impl Compensation {
    /// The component-value form of the network (poles and zeros synthesised).
    pub fn components(&self) -> Result<Compensation, ModelError> {
        let Compensation::PolesZeros {
            r1,
            integrator_hz,
            zeros_hz,
            poles_hz,
        } = self
        else {
            return Ok(self.clone());
        };
        positive("compensation.r1", *r1)?;
        positive("compensation.integrator_hz", *integrator_hz)?;
        let c_total = 1.0 / (r1 * TAU * integrator_hz);
        match (zeros_hz.as_slice(), poles_hz.as_slice()) {
            ([], []) => Ok(Compensation::TypeI { r1: *r1, c1: c_total }),
            (&[fz], &[fp]) if fp > fz && fz > 0.0 => {
                let c2 = c_total * fz / fp;
                let c1 = c_total - c2;
                Ok(Compensation::TypeII { r1: *r1, r2: 1.0 / (TAU * fz * c1), c1, c2 })
            }
            (&[fz1, fz2], &[fp1, fp2]) if fz1 > 0.0 && fp1 > fz2 && fz2 > 0.0 && fp2 > fz1 => {
                // Zeros 1/(R2·C1) and 1/((R1+R3)·C3); poles 1/(R3·C3) and
                // (C1+C2)/(R2·C1·C2); integrator 1/(R1·(C1+C2)).
                let c2 = c_total * fz1 / fp2;
                let c1 = c_total - c2;
                let c3 = (1.0 / (TAU * fz2) - 1.0 / (TAU * fp1)) / r1;
                Ok(Compensation::TypeIII {
                    r1: *r1,
                    r2: 1.0 / (TAU * fz1 * c1),
                    r3: 1.0 / (TAU * fp1 * c3),
                    c1,
                    c2,
                    c3,
                })
            }
            _ => Err(ModelError::Infeasible(format!(
                "compensation: zeros {zeros_hz:?} Hz and poles {poles_hz:?} Hz are not a type I, II or III shape \
                 (expected none, or one zero below one pole, or two zeros with the first pole above the second zero \
                 and the second pole above the first zero)"
            ))),
        }
    }

    /// Adds the network: Zi from `reference` to `inverting`, Zf from `output` to
    /// `inverting`. Names start with `name`.
    pub fn build(
        &self,
        net: &mut Net,
        name: &str,
        reference: NodeId,
        inverting: NodeId,
        output: NodeId,
    ) -> Result<(), ModelError> {
        let c = net.circuit();
        match self.components()? {
            Compensation::TypeI { r1, c1 } => {
                c.resistor(&format!("{name}.r1"), reference, inverting, r1)?;
                c.capacitor(&format!("{name}.c1"), output, inverting, c1, 0.0)?;
            }
            Compensation::TypeII { r1, r2, c1, c2 } => {
                c.resistor(&format!("{name}.r1"), reference, inverting, r1)?;
                type_ii_feedback(net, name, output, inverting, r2, c1, c2)?;
            }
            Compensation::TypeIII {
                r1,
                r2,
                r3,
                c1,
                c2,
                c3,
            } => {
                let c = net.circuit();
                c.resistor(&format!("{name}.r1"), reference, inverting, r1)?;
                let mid = c.node(&format!("{name}.r3c3"));
                c.resistor(&format!("{name}.r3"), reference, mid, r3)?;
                c.capacitor(&format!("{name}.c3"), mid, inverting, c3, 0.0)?;
                type_ii_feedback(net, name, output, inverting, r2, c1, c2)?;
            }
            Compensation::PolesZeros { .. } => {
                return Err(ModelError::Infeasible(
                    "compensation: poles and zeros were not synthesised".into(),
                ))
            }
        }
        Ok(())
    }
}

fn type_ii_feedback(
    net: &mut Net,
    name: &str,
    output: NodeId,
    inverting: NodeId,
    r2: f64,
    c1: f64,
    c2: f64,
) -> Result<(), ModelError> {
    let c = net.circuit();
    let mid = c.node(&format!("{name}.r2c1"));
    c.resistor(&format!("{name}.r2"), output, mid, r2)?;
    c.capacitor(&format!("{name}.c1"), mid, inverting, c1, 0.0)?;
    c.capacitor(&format!("{name}.c2"), output, inverting, c2, 0.0)?;
    Ok(())
}

/// Internal-node load of the macromodel, ohms (any value works; gm follows from it).
const INTERNAL_R: f64 = 1e6;
/// Clamp diodes: ideal threshold, small on-resistance against [`INTERNAL_R`].
const CLAMP: DiodeParams = DiodeParams {
    vf: 0.0,
    r_on: 1.0,
    r_off: 1e12,
};

impl Amplifier {
    /// Checks the values.
    pub fn validate(&self, field: &str) -> Result<(), ModelError> {
        positive(&format!("{field}.dc_gain"), self.dc_gain)?;
        positive(&format!("{field}.gain_bandwidth"), self.gain_bandwidth)?;
        if self.output_high <= self.output_low {
            return Err(ModelError::OutOfRange {
                field: format!("{field}.output_high"),
                value: self.output_high,
                allowed: format!("above output_low = {}", self.output_low),
            });
        }
        Ok(())
    }

    /// Adds the macromodel with inputs `plus`, `minus` and returns its output node.
    /// The internal node starts at `initial` volts (clamped to the limits).
    pub fn build(
        &self,
        net: &mut Net,
        name: &str,
        plus: NodeId,
        minus: NodeId,
        initial: f64,
    ) -> Result<NodeId, ModelError> {
        let gm = self.dc_gain / INTERNAL_R;
        let co = gm / (TAU * self.gain_bandwidth);
        let start = initial.clamp(self.output_low, self.output_high);
        let c = net.circuit();
        let internal = c.node(&format!("{name}.int"));
        let control = Signal {
            terms: vec![
                (gm, Quantity::NodeVoltage(plus)),
                (-gm, Quantity::NodeVoltage(minus)),
            ],
        };
        // Current flows ground → internal through the source, i.e. into the node.
        c.controlled_current_source(&format!("{name}.gm"), NodeId::GROUND, internal, control)?;
        c.resistor(&format!("{name}.ro"), internal, NodeId::GROUND, INTERNAL_R)?;
        c.capacitor(&format!("{name}.co"), internal, NodeId::GROUND, co, start)?;
        // The rails are fixed levels: sources driven by the engine's constant, which
        // unlike independent sources add no entries to the state (nothing will step
        // or ramp them).
        let (hi, lo) = (c.node(&format!("{name}.hi")), c.node(&format!("{name}.lo")));
        let level = |v: f64| Signal {
            terms: vec![(v, Quantity::One)],
        };
        c.controlled_voltage_source(
            &format!("{name}.vhi"),
            hi,
            NodeId::GROUND,
            level(self.output_high),
        )?;
        c.controlled_voltage_source(
            &format!("{name}.vlo"),
            lo,
            NodeId::GROUND,
            level(self.output_low),
        )?;
        c.diode(&format!("{name}.clamp_hi"), internal, hi, CLAMP)?;
        c.diode(&format!("{name}.clamp_lo"), lo, internal, CLAMP)?;
        let out = c.node(&format!("{name}.out"));
        c.controlled_voltage_source(
            &format!("{name}.buf"),
            out,
            NodeId::GROUND,
            Signal::of(Quantity::NodeVoltage(internal)),
        )?;
        Ok(out)
    }
}
