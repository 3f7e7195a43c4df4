//! The scenario file as written, its drive part: a fixed duty or the PWM controller with
//! its oscillator, voltage loop, amplifier and compensation.

use schemars::JsonSchema;
use serde::Deserialize;

use crate::units::{Farads, Hertz, Ohms, Ratio, Seconds, Volts};

/// Gate drive: a fixed duty, or the PWM controller.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum Drive {
    /// Fixed frequency and duty.
    OpenLoop(OpenLoop),
    /// The behavioural voltage-mode PWM controller.
    Controller(Box<Controller>),
}

/// Fixed-frequency, fixed-duty drive.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct OpenLoop {
    /// Switching frequency.
    pub frequency: Hertz,
    /// Main-switch on-time over the period, 0 ≤ duty < 1.
    pub duty: Ratio,
    /// Dead time around the active-clamp switch (default 0).
    pub dead_time: Option<Seconds>,
}

/// Voltage-mode PWM controller. The switch turns on at the clock; the ramp falls from
/// peak to valley, and the pulse ends when it falls below the control voltage.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Controller {
    /// Oscillator.
    pub oscillator: Oscillator,
    /// Output mode (default single_ended).
    pub mode: Option<Mode>,
    /// Most duty per output, over that output's own period.
    pub max_duty: Ratio,
    /// Duty-limit soft-start ramp time (default 0: none).
    pub soft_start: Option<Seconds>,
    /// Voltage regulation loop.
    pub voltage_loop: VoltageLoop,
    /// Current limit on the output inductor current (omit for none).
    pub current_limit: Option<CurrentLimit>,
    /// Leading-edge blanking after turn-on (default 0).
    pub blanking: Option<Seconds>,
    /// Minimum on-time once a pulse starts (default 0).
    pub min_on_time: Option<Seconds>,
    /// Delay from command to gate (default 0).
    pub gate_delay: Option<Seconds>,
    /// Input under-voltage lockout (omit for none).
    pub lockout: Option<Lockout>,
    /// Dead time around an active clamp's complementary switch (default 0).
    pub aux_dead_time: Option<Seconds>,
    /// Isolated feedback through an optocoupler (omit for direct feedback).
    pub isolated: Option<Isolated>,
}

/// Optocoupler feedback: the voltage amplifier is the secondary-side shunt regulator;
/// its output drives the LED through `led_resistor`; the transistor's current times
/// `emitter_resistor` is the control voltage, with the coupler's pole.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Isolated {
    /// LED series resistor.
    pub led_resistor: Ohms,
    /// LED forward threshold.
    pub led_vf: Volts,
    /// Current-transfer ratio (A/A).
    pub ctr: Ratio,
    /// Emitter resistor on the primary.
    pub emitter_resistor: Ohms,
    /// The coupler's pole.
    pub pole: Hertz,
}

/// Oscillator frequency and ramp levels.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Oscillator {
    /// Clock frequency.
    pub frequency: Hertz,
    /// Ramp valley.
    pub valley: Volts,
    /// Ramp peak.
    pub peak: Volts,
}

/// How the outputs follow the clock.
#[derive(Clone, Copy, Debug, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum Mode {
    /// One pulse per clock period on the main switch.
    SingleEnded,
    /// Outputs A and B alternate clock periods, each at half the clock frequency.
    Alternating,
}

/// Voltage regulation loop: divider, reference and error amplifier.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct VoltageLoop {
    /// Reference.
    pub reference: Volts,
    /// Reference soft-start ramp time (default 0: none).
    pub reference_soft_start: Option<Seconds>,
    /// Divider resistor from the output to the sense node.
    pub divider_top: Ohms,
    /// Divider resistor from the sense node to ground.
    pub divider_bottom: Ohms,
    /// Error amplifier.
    pub amplifier: Amplifier,
    /// Its compensation network.
    pub compensation: Compensation,
}

/// Current limit on the output inductor current.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CurrentLimit {
    /// Sense gain, volts per ampere.
    pub sense_gain: Ohms,
    /// Limit threshold on the sensed voltage.
    pub threshold: Volts,
    /// Current amplifier.
    pub amplifier: Amplifier,
    /// Its compensation network.
    pub compensation: Compensation,
}

/// Error amplifier as read from a data sheet.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Amplifier {
    /// Open-loop DC gain, V/V.
    pub dc_gain: Ratio,
    /// Gain-bandwidth product.
    pub gain_bandwidth: Hertz,
    /// Lowest output.
    pub output_low: Volts,
    /// Highest output.
    pub output_high: Volts,
}

/// Compensation network: component values of a type I, II or III network, or the
/// integrator, zeros and poles to synthesise one.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum Compensation {
    /// Integrator: R1 in, C1 in feedback.
    Type1(Type1),
    /// Integrator, one zero, one pole: R1 in; R2 + C1 in series in feedback, C2 across.
    Type2(Type2),
    /// Integrator, two zeros, two poles: type II feedback and R3 + C3 across R1.
    Type3(Type3),
    /// Integrator crossover with zero to two zeros and as many poles.
    PolesZeros(PolesZeros),
}

/// Type I network values.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Type1 {
    /// Input resistor.
    pub r1: Ohms,
    /// Feedback capacitor.
    pub c1: Farads,
}

/// Type II network values.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Type2 {
    /// Input resistor.
    pub r1: Ohms,
    /// Feedback resistor.
    pub r2: Ohms,
    /// Feedback series capacitor.
    pub c1: Farads,
    /// Feedback parallel capacitor.
    pub c2: Farads,
}

/// Type III network values.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Type3 {
    /// Input resistor.
    pub r1: Ohms,
    /// Feedback resistor.
    pub r2: Ohms,
    /// Input-branch resistor in series with C3.
    pub r3: Ohms,
    /// Feedback series capacitor.
    pub c1: Farads,
    /// Feedback parallel capacitor.
    pub c2: Farads,
    /// Input-branch capacitor.
    pub c3: Farads,
}

/// A network given by its integrator, zeros and poles.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct PolesZeros {
    /// Input resistor to realise the network with.
    pub r1: Ohms,
    /// Integrator unity-gain frequency.
    pub integrator: Hertz,
    /// Zero frequencies (none, one or two).
    #[serde(default)]
    pub zeros: Vec<Hertz>,
    /// Pole frequencies besides the origin (as many as zeros).
    #[serde(default)]
    pub poles: Vec<Hertz>,
}

/// Input under-voltage lockout.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Lockout {
    /// Input voltage at which switching starts.
    pub start: Volts,
    /// Input voltage below which switching stops (below `start`).
    pub stop: Volts,
}
