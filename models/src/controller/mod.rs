//! The behavioural voltage-mode PWM controller: no device model, just the functions a
//! designer sets — oscillator ramp, duty clamp with soft start, two error amplifiers
//! combined highest-wins, reference with soft start, feedback divider, output modes,
//! blanking, minimum on-time, gate delay and under-voltage lockout.
//!
//! The analogue parts (amplifiers, compensation, reference, divider, the highest-wins
//! diode OR) are circuit elements in the same engine circuit as the power stage, so the
//! engine integrates them exactly with the converter. The sequential parts (clock,
//! latch, clamp, lockout) are the runtime in [`modulator`]; the comparator crossing of
//! the control voltage with the ramp is an engine event located exactly.
//!
//! Convention: the switch turns on at the clock; the ramp falls from `peak` to `valley`
//! over the period and the pulse ends when it falls below the control voltage, so
//! duty = (peak − vc)/(peak − valley): a higher control voltage means less duty, which
//! lets the current-limit amplifier override the voltage amplifier by being higher.

pub mod amplifier;
pub mod isolated;
pub mod modulator;

use stepflux_engine::{DiodeParams, ElementId, NodeId, Quantity, Signal, Waveform};

pub use amplifier::{Amplifier, Compensation};
pub use isolated::IsolatedFeedback;

use crate::components::{non_negative, positive};
use crate::error::ModelError;
use crate::template::{Converter, Net, Probe};

/// Oscillator: frequency and ramp levels.
#[derive(Clone, Debug, PartialEq)]
pub struct Oscillator {
    /// Clock frequency, hertz.
    pub frequency: f64,
    /// Ramp valley, volts.
    pub valley: f64,
    /// Ramp peak, volts.
    pub peak: f64,
}

/// How the outputs follow the clock.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum OutputMode {
    /// One pulse per clock period on the main switch.
    SingleEnded,
    /// Outputs A and B alternate clock periods, each at half the clock frequency; A
    /// drives the main switch, B the auxiliary switch if the template has one.
    Alternating,
}

/// Voltage regulation loop.
#[derive(Clone, Debug, PartialEq)]
pub struct VoltageLoop {
    /// Reference, volts.
    pub reference: f64,
    /// Reference soft-start ramp time, seconds (0 = none).
    pub reference_soft_start: f64,
    /// Divider resistor from the output to the sense node, ohms.
    pub divider_top: f64,
    /// Divider resistor from the sense node to ground, ohms.
    pub divider_bottom: f64,
    /// The amplifier.
    pub amplifier: Amplifier,
    /// Its compensation.
    pub compensation: Compensation,
}

impl VoltageLoop {
    /// Output voltage the loop regulates to: Vref·(1 + Rtop/Rbot).
    pub fn set_point(&self) -> f64 {
        self.reference * (1.0 + self.divider_top / self.divider_bottom)
    }

    /// Divider from `out` and the reference source driven by `reference`; returns the
    /// sense node, the reference source and its node. The switching model and the
    /// averaged model both build their voltage loop from this and [`error_amplifier`].
    pub(crate) fn build_sense(
        &self,
        net: &mut Net,
        out: NodeId,
        reference: Waveform,
    ) -> Result<(NodeId, ElementId, NodeId), ModelError> {
        let fb = net.node("ctl.fb");
        net.circuit()
            .resistor("ctl.rtop", out, fb, self.divider_top)?;
        net.circuit()
            .resistor("ctl.rbot", fb, NodeId::GROUND, self.divider_bottom)?;
        let ref_node = net.node("ctl.ref");
        let source =
            net.circuit()
                .voltage_source("ctl.vref", ref_node, NodeId::GROUND, reference)?;
        Ok((fb, source, ref_node))
    }
}

/// Current-limit loop on the output inductor current.
#[derive(Clone, Debug, PartialEq)]
pub struct CurrentLimit {
    /// Sense gain, volts per ampere of output inductor current.
    pub sense_gain: f64,
    /// Limit threshold on the sensed voltage, volts.
    pub threshold: f64,
    /// The amplifier.
    pub amplifier: Amplifier,
    /// Its compensation.
    pub compensation: Compensation,
}

/// Input under-voltage lockout.
#[derive(Clone, Debug, PartialEq)]
pub struct Lockout {
    /// Input voltage at which switching starts, volts.
    pub start: f64,
    /// Input voltage below which switching stops, volts (below `start`).
    pub stop: f64,
}

/// Everything the controller is configured with.
#[derive(Clone, Debug, PartialEq)]
pub struct ControllerSpec {
    /// Oscillator.
    pub oscillator: Oscillator,
    /// Output mode.
    pub mode: OutputMode,
    /// Most duty per output (on-time over that output's own period).
    pub max_duty: f64,
    /// Duty-limit soft-start ramp time, seconds (0 = none).
    pub soft_start: f64,
    /// Voltage loop.
    pub voltage_loop: VoltageLoop,
    /// Optional current limit.
    pub current_limit: Option<CurrentLimit>,
    /// Leading-edge blanking: the comparator is ignored this long after turn-on, seconds.
    pub blanking: f64,
    /// Minimum on-time once a pulse starts, seconds.
    pub min_on_time: f64,
    /// Delay from command to gate, seconds.
    pub gate_delay: f64,
    /// Optional input under-voltage lockout.
    pub lockout: Option<Lockout>,
    /// Dead time around the complementary switch of an active clamp, seconds (the
    /// auxiliary switch is on whenever the main one is off, less this on each side).
    pub aux_dead_time: f64,
    /// Optional isolated feedback: the voltage amplifier becomes the secondary-side
    /// shunt regulator and drives the control voltage through an optocoupler.
    pub isolated: Option<IsolatedFeedback>,
}

/// Where the controller's parts sit in the circuit.
#[derive(Clone, Debug, PartialEq)]
pub struct ControllerParts {
    /// The control voltage node (highest of the amplifier outputs).
    pub control: NodeId,
    /// The reference source.
    pub reference: stepflux_engine::ElementId,
}

/// Pull-down of the highest-wins node, ohms: large against the OR diodes' on-resistance.
const OR_PULLDOWN: f64 = 1e6;
/// The OR diodes: ideal threshold, 1 Ω on.
const OR_DIODE: DiodeParams = DiodeParams {
    vf: 0.0,
    r_on: 1.0,
    r_off: 1e12,
};

impl ControllerSpec {
    /// Checks every value, with field paths.
    pub fn validate(&self) -> Result<(), ModelError> {
        let o = &self.oscillator;
        positive("controller.oscillator.frequency", o.frequency)?;
        if o.peak <= o.valley {
            return Err(ModelError::OutOfRange {
                field: "controller.oscillator.peak".into(),
                value: o.peak,
                allowed: format!("above the valley, {} V", o.valley),
            });
        }
        let cap = if self.mode == OutputMode::Alternating {
            0.5
        } else {
            1.0
        };
        if !(self.max_duty > 0.0 && self.max_duty < cap) {
            return Err(ModelError::OutOfRange {
                field: "controller.max_duty".into(),
                value: self.max_duty,
                allowed: format!("0 < max_duty < {cap} in this output mode"),
            });
        }
        for (f, v) in [
            ("controller.soft_start", self.soft_start),
            ("controller.blanking", self.blanking),
            ("controller.min_on_time", self.min_on_time),
            ("controller.gate_delay", self.gate_delay),
            ("controller.aux_dead_time", self.aux_dead_time),
            (
                "controller.voltage_loop.reference_soft_start",
                self.voltage_loop.reference_soft_start,
            ),
        ] {
            non_negative(f, v)?;
        }
        let v = &self.voltage_loop;
        positive("controller.voltage_loop.reference", v.reference)?;
        positive("controller.voltage_loop.divider_top", v.divider_top)?;
        positive("controller.voltage_loop.divider_bottom", v.divider_bottom)?;
        v.amplifier.validate("controller.voltage_loop.amplifier")?;
        v.compensation.components()?;
        if let Some(c) = &self.current_limit {
            positive("controller.current_limit.sense_gain", c.sense_gain)?;
            positive("controller.current_limit.threshold", c.threshold)?;
            c.amplifier.validate("controller.current_limit.amplifier")?;
            c.compensation.components()?;
        }
        if let Some(iso) = &self.isolated {
            iso.validate()?;
        }
        if let Some(l) = &self.lockout {
            positive("controller.lockout.start", l.start)?;
            if !(l.stop > 0.0 && l.stop < l.start) {
                return Err(ModelError::OutOfRange {
                    field: "controller.lockout.stop".into(),
                    value: l.stop,
                    allowed: format!("between 0 and start = {} V", l.start),
                });
            }
        }
        Ok(())
    }

    /// Clock period, seconds.
    pub fn clock_period(&self) -> f64 {
        1.0 / self.oscillator.frequency
    }

    /// Adds the analogue parts to a converter's circuit; returns the converter with
    /// them and where they are.
    pub fn attach(&self, conv: &Converter) -> Result<(Converter, ControllerParts), ModelError> {
        self.validate()?;
        let out = conv
            .circuit
            .find_node("out")
            .ok_or_else(|| ModelError::Infeasible("converter has no 'out' node".into()))?;
        let mut net = Net::from_circuit(conv.circuit.clone());
        let v = &self.voltage_loop;
        let ramp = match v.reference_soft_start {
            t if t > 0.0 => Waveform::PiecewiseLinear(vec![(0.0, 0.0), (t, v.reference)]),
            _ => Waveform::Constant(v.reference),
        };
        let (fb, reference, ref_node) = v.build_sense(&mut net, out, ramp)?;
        let control = net.node("ctl.vc");
        net.circuit()
            .resistor("ctl.pulldown", control, NodeId::GROUND, OR_PULLDOWN)?;
        let mut probes_iso = Vec::new();
        let ea = error_amplifier(
            &mut net,
            "ctl.ea",
            fb,
            ref_node,
            &v.amplifier,
            &v.compensation,
            v.amplifier.output_low,
        )?;
        let voltage_path = match &self.isolated {
            Some(iso) => {
                let (emitter, iso_probes) = iso.build(&mut net, ea)?;
                probes_iso = iso_probes;
                emitter
            }
            None => ea,
        };
        net.circuit()
            .diode("ctl.or_v", voltage_path, control, OR_DIODE)?;
        let mut probes = vec![
            probe("ctl.vc", Signal::of(Quantity::NodeVoltage(control)), "V"),
            probe("ctl.ea.v", Signal::of(Quantity::NodeVoltage(ea)), "V"),
            probe(
                "ctl.ref.v",
                Signal::of(Quantity::NodeVoltage(ref_node)),
                "V",
            ),
        ];
        if let Some(cl) = &self.current_limit {
            let lout = conv.key.output_inductor;
            let cs = net.node("ctl.cs");
            let sense = Signal {
                terms: vec![(cl.sense_gain, Quantity::Current(lout))],
            };
            net.circuit()
                .controlled_voltage_source("ctl.sense", cs, NodeId::GROUND, sense)?;
            let lim = net.node("ctl.ilim");
            // A fixed level: driven by the engine's constant, so it adds no state.
            let threshold = Signal {
                terms: vec![(cl.threshold, Quantity::One)],
            };
            net.circuit()
                .controlled_voltage_source("ctl.vlim", lim, NodeId::GROUND, threshold)?;
            let ca = error_amplifier(
                &mut net,
                "ctl.ca",
                cs,
                lim,
                &cl.amplifier,
                &cl.compensation,
                cl.amplifier.output_low,
            )?;
            net.circuit().diode("ctl.or_i", ca, control, OR_DIODE)?;
            probes.push(probe(
                "ctl.ca.v",
                Signal::of(Quantity::NodeVoltage(ca)),
                "V",
            ));
        }
        probes.extend(probes_iso);
        let mut with = conv.clone();
        with.probes.extend(probes);
        with.circuit = net.into_circuit();
        Ok((with, ControllerParts { control, reference }))
    }
}

/// An amplifier sensing `sense` against `reference` through its compensation, its
/// output starting at `start` volts. The switching model starts it at its lower limit,
/// as an amplifier whose inputs both sit at zero at power-up and whose output stage is
/// pulled low (common practice); the averaged model at its operating point.
pub(crate) fn error_amplifier(
    net: &mut Net,
    name: &str,
    sense: NodeId,
    reference: NodeId,
    amp: &Amplifier,
    comp: &Compensation,
    start: f64,
) -> Result<NodeId, ModelError> {
    let minus = net.node(&format!("{name}.minus"));
    let out = amp.build(net, name, sense, minus, start)?;
    comp.build(net, &format!("{name}.comp"), reference, minus, out)?;
    Ok(out)
}

fn probe(name: &str, signal: Signal, unit: &'static str) -> Probe {
    Probe {
        name: name.to_string(),
        signal,
        unit,
    }
}
