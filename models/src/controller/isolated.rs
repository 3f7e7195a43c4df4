//! The isolated feedback path: a shunt regulator on the secondary drives an
//! optocoupler's LED; its transistor's current, through an emitter resistor on the
//! primary, becomes the control voltage.
//!
//! Behavioural, as circuit elements: the shunt regulator is the voltage loop's own
//! error-amplifier macromodel and compensation (its gain, bandwidth, clamps and
//! network), whose output feeds the LED through `led_resistor`; the LED is a diode of
//! threshold `led_vf`; the transistor is a current source of CTR × the LED current
//! into the emitter resistor, with a capacitor across it for the optocoupler's pole:
//! v = R_e·CTR·I_LED / (1 + s/ω_p). Output rises with the output voltage, so it enters
//! the highest-wins node like the non-isolated amplifier.

use stepflux_engine::{DiodeParams, NodeId, Quantity, Signal};

use crate::components::positive;
use crate::error::ModelError;
use crate::template::{Net, Probe};

/// Optocoupler feedback parameters.
#[derive(Clone, Debug, PartialEq)]
pub struct IsolatedFeedback {
    /// Series resistor from the shunt regulator's output to the LED, ohms.
    pub led_resistor: f64,
    /// LED forward threshold, volts.
    pub led_vf: f64,
    /// Current-transfer ratio, A/A.
    pub ctr: f64,
    /// Emitter resistor on the primary, ohms.
    pub emitter_resistor: f64,
    /// Optocoupler pole, hertz.
    pub pole_hz: f64,
}

/// LED on-resistance, ohms: small against any series resistor a designer uses.
const LED_R_ON: f64 = 1.0;

impl IsolatedFeedback {
    /// Checks the values with field paths.
    pub fn validate(&self) -> Result<(), ModelError> {
        positive("controller.isolated.led_resistor", self.led_resistor)?;
        crate::components::non_negative("controller.isolated.led_vf", self.led_vf)?;
        positive("controller.isolated.ctr", self.ctr)?;
        positive(
            "controller.isolated.emitter_resistor",
            self.emitter_resistor,
        )?;
        positive("controller.isolated.pole_hz", self.pole_hz)
    }

    /// DC gain from the shunt regulator's output to the control voltage, V/V, while the
    /// LED conducts: CTR·R_e/R_led.
    pub fn gain(&self) -> f64 {
        self.ctr * self.emitter_resistor / self.led_resistor
    }

    /// Adds the LED and transistor after the shunt regulator's output `shunt_out`;
    /// returns the emitter node (the path's output) and its probes.
    pub fn build(
        &self,
        net: &mut Net,
        shunt_out: NodeId,
    ) -> Result<(NodeId, Vec<Probe>), ModelError> {
        self.validate()?;
        let c = net.circuit();
        let anode = c.node("ctl.led.a");
        c.resistor("ctl.led.r", shunt_out, anode, self.led_resistor)?;
        let led = c.diode(
            "ctl.led",
            anode,
            NodeId::GROUND,
            DiodeParams {
                vf: self.led_vf,
                r_on: LED_R_ON,
                r_off: 1e12,
            },
        )?;
        let emitter = c.node("ctl.iso");
        let transistor = Signal {
            terms: vec![(self.ctr, Quantity::Current(led))],
        };
        // Current flows ground → emitter through the source, i.e. into the node.
        c.controlled_current_source("ctl.opto", NodeId::GROUND, emitter, transistor)?;
        c.resistor("ctl.re", emitter, NodeId::GROUND, self.emitter_resistor)?;
        let ce = 1.0 / (2.0 * std::f64::consts::PI * self.pole_hz * self.emitter_resistor);
        c.capacitor("ctl.ce", emitter, NodeId::GROUND, ce, 0.0)?;
        let probes = vec![
            Probe {
                name: "ctl.led.i".into(),
                signal: Signal::of(Quantity::Current(led)),
                unit: "A",
            },
            Probe {
                name: "ctl.iso.v".into(),
                signal: Signal::of(Quantity::NodeVoltage(emitter)),
                unit: "V",
            },
        ];
        Ok((emitter, probes))
    }
}
