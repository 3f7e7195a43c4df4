//! The scenario file as written: serde types that only parse, refuse unknown fields and
//! check units. Ranges and consistency are checked in [`super::validate`].
//!
//! Enumerations are written as an object with one key naming the choice, e.g.
//! `"reset": { "rcd_clamp": { … } }`, so an error inside a choice carries its full path.
//! Every key and choice name is snake_case. Names of the previous release still load
//! (serde aliases) with a deprecation warning naming the new field: [`super::deprecated`].
//! Values carry their unit (see [`crate::units`]). The JSON Schema printed by
//! `stepflux schema` is generated from these types, doc comments included.

use std::collections::BTreeMap;

use schemars::JsonSchema;
use serde::Deserialize;

use crate::units::{
    Amperes, AmperesPerSecond, Coulombs, CubicMetres, Farads, Henries, Hertz, Joules, Ohms, Ratio,
    Seconds, SquareMetres, Tesla, Volts, VoltsPerSecond, Watts,
};

mod drive;
pub use drive::*;

/// A stepflux scenario: one forward converter, how it is driven, what happens to it
/// and for how long, and the limits its run is judged against.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Scenario {
    /// Optional reference to the JSON Schema, for editors; ignored by stepflux.
    #[serde(rename = "$schema", default)]
    #[allow(dead_code)]
    // Accepted so editors can find the schema; stepflux needs nothing from it.
    pub schema: Option<String>,
    /// Scenario name, also the output folder name: letters, digits, '-', '_' and '.',
    /// not starting with '.', at most 64 characters.
    pub name: String,
    /// Free text for reports.
    #[serde(default)]
    pub description: String,
    /// Why each value was chosen: field path → reason (free text for reports; written
    /// by `stepflux size`).
    #[serde(default)]
    #[allow(dead_code)]
    // Read by people, not by stepflux.
    pub design_notes: BTreeMap<String, String>,
    /// The power stage.
    pub converter: Converter,
    /// How the switches are driven.
    pub drive: Drive,
    /// Time settings of the run.
    pub analysis: Analysis,
    /// Load, line and reference steps at set times.
    #[serde(default, alias = "events")]
    pub disturbances: Vec<Disturbance>,
    /// Specification limits the run is judged against (all optional).
    #[serde(default)]
    pub limits: Limits,
    /// Signals to write as waveforms (empty: all). Names are the converter's probes,
    /// e.g. "out.v", "mag.i", "core.b"; `stepflux check` lists them.
    #[serde(default, alias = "save")]
    pub signals: Vec<String>,
    /// Fixed controller bias power for whole-converter efficiency (default 0 W).
    pub bias_power: Option<Watts>,
}

/// The forward converter's power stage. Parasitics left out are zero (the element is
/// not modelled); off-state resistances default to 10 MΩ.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Converter {
    /// Input source.
    pub input: Input,
    /// Transformer (the reset winding, if any, is part of `reset`).
    pub transformer: Transformer,
    /// Main (low-side) primary switch.
    pub switch: Switch,
    /// How the core is reset; names the template.
    pub reset: Reset,
    /// Forward rectifier diode.
    pub rectifier: Diode,
    /// Freewheel diode.
    pub freewheel: Diode,
    /// Output inductor.
    pub output_inductor: Inductor,
    /// Output capacitor.
    pub output_capacitor: Capacitor,
    /// Load: a resistor, a current sink, or both in parallel.
    pub load: Load,
}

/// Input source with an optional LC filter and bulk capacitor.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Input {
    /// Source voltage at t = 0 (nominal line).
    pub voltage: Volts,
    /// Source resistance (default 0: none).
    pub resistance: Option<Ohms>,
    /// Series inductor then shunt capacitor between the source and the converter.
    pub filter: Option<InputFilter>,
    /// Bulk capacitor at the converter input.
    pub bulk: Option<Capacitor>,
}

/// Input LC filter.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct InputFilter {
    /// Series inductance.
    pub inductance: Henries,
    /// Series inductor resistance (default 0).
    pub resistance: Option<Ohms>,
    /// Shunt capacitor.
    pub capacitor: Capacitor,
}

/// Transformer core and the primary and secondary windings.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Transformer {
    /// Primary turns Np.
    pub primary_turns: Ratio,
    /// Secondary turns Ns.
    pub secondary_turns: Ratio,
    /// Magnetising inductance referred to the primary.
    pub magnetising_inductance: Henries,
    /// Primary leakage inductance (default 0).
    pub primary_leakage: Option<Henries>,
    /// Secondary leakage inductance (default 0).
    pub secondary_leakage: Option<Henries>,
    /// Primary winding resistance (default 0).
    pub primary_resistance: Option<Ohms>,
    /// Secondary winding resistance (default 0).
    pub secondary_resistance: Option<Ohms>,
    /// Core effective area Ae.
    pub core_area: SquareMetres,
    /// Saturation flux density Bsat.
    pub saturation_flux_density: Tesla,
    /// Incremental inductance above the saturation knee; omit for a core that does not
    /// saturate in the model.
    pub saturated_inductance: Option<Henries>,
    /// Core loss by the Steinmetz equation P = k·f^α·B̂^β·V_core, with f the switching
    /// frequency and B̂ half the simulated peak-to-peak flux swing of each cycle (omit
    /// for none).
    pub core_loss: Option<CoreLoss>,
}

/// Steinmetz coefficients of the core material and the core's volume.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct CoreLoss {
    /// Coefficient k: watts per cubic metre at 1 Hz and 1 T (a plain number).
    pub k: Ratio,
    /// Frequency exponent α.
    pub alpha: Ratio,
    /// Flux-density exponent β.
    pub beta: Ratio,
    /// Effective core volume Ve.
    pub volume: CubicMetres,
}

/// A primary or clamp switch.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Switch {
    /// On resistance.
    pub r_on: Ohms,
    /// Off resistance (default 10 MΩ).
    pub r_off: Option<Ohms>,
    /// Output capacitance Coss (default 0).
    pub output_capacitance: Option<Farads>,
    /// Body diode, if modelled.
    pub body_diode: Option<Diode>,
    /// Drain–source voltage rating.
    pub voltage_rating: Volts,
    /// Transition loss of the main switch, from its rise and fall times or an energy per
    /// transition (omit for none).
    pub transitions: Option<Transitions>,
    /// Gate-drive loss of the main switch, Qg·Vdrive·f (omit for none).
    pub gate_drive: Option<GateDrive>,
}

/// How the main switch's transition loss is figured.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(rename_all = "kebab-case")]
pub enum Transitions {
    /// ½·V·I·t per transition from the simulated voltage and current.
    Times(TransitionTimes),
    /// A fixed energy per turn-on and per turn-off.
    Energy(TransitionEnergy),
}

/// Switching times of the main switch.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct TransitionTimes {
    /// Turn-on time (current rise, voltage fall).
    pub rise_time: Seconds,
    /// Turn-off time (voltage rise, current fall).
    pub fall_time: Seconds,
}

/// Switching energies of the main switch.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct TransitionEnergy {
    /// Energy per turn-on.
    pub turn_on: Joules,
    /// Energy per turn-off.
    pub turn_off: Joules,
}

/// The main switch's gate drive.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct GateDrive {
    /// Total gate charge Qg at the drive voltage.
    pub charge: Coulombs,
    /// Gate drive voltage.
    pub drive_voltage: Volts,
}

/// A diode.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Diode {
    /// Forward threshold voltage.
    pub vf: Volts,
    /// Forward (dynamic) resistance.
    #[serde(alias = "rd")]
    pub r_on: Ohms,
    /// Off resistance (default 10 MΩ).
    pub r_off: Option<Ohms>,
    /// Junction capacitance (default 0).
    pub junction_capacitance: Option<Farads>,
    /// Reverse-voltage rating.
    pub reverse_rating: Volts,
}

/// Output inductor.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Inductor {
    /// Inductance.
    pub inductance: Henries,
    /// Winding resistance (default 0).
    pub dcr: Option<Ohms>,
    /// Saturation current rating.
    pub saturation_current: Amperes,
}

/// A capacitor.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Capacitor {
    /// Capacitance.
    pub capacitance: Farads,
    /// Equivalent series resistance (default 0).
    pub esr: Option<Ohms>,
}

/// Output load.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Load {
    /// Load resistor (omit for none).
    pub resistance: Option<Ohms>,
    /// Constant-current sink at t = 0 (omit for none; `load_current` disturbances move it).
    pub current: Option<Amperes>,
}

/// How the core is reset while the switch is off; the choice names the template.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum Reset {
    /// Single switch; a reset winding and diode return the magnetising energy to the
    /// input.
    #[serde(alias = "reset-winding")]
    ResetWinding(ResetWinding),
    /// Single switch; a diode, capacitor and resistor clamp the drain to the input.
    #[serde(alias = "rcd-clamp")]
    RcdClamp(RcdClamp),
    /// High- and low-side switches; two diodes clamp the winding to the input rail.
    #[serde(alias = "two-switch")]
    TwoSwitch(TwoSwitch),
    /// An auxiliary switch and a capacitor clamp the drain, gated complementary to the
    /// main switch.
    #[serde(alias = "active-clamp")]
    ActiveClamp(ActiveClamp),
}

/// Reset (tertiary) winding.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ResetWinding {
    /// Reset winding turns Nr.
    pub turns: Ratio,
    /// Reset winding leakage inductance (default 0).
    pub leakage: Option<Henries>,
    /// Reset winding resistance (default 0).
    pub resistance: Option<Ohms>,
    /// Reset diode.
    pub diode: Diode,
}

/// Resistor–capacitor–diode clamp.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct RcdClamp {
    /// Clamp diode.
    pub diode: Diode,
    /// Clamp resistor.
    pub resistance: Ohms,
    /// Clamp capacitor.
    pub capacitor: Capacitor,
    /// Clamp capacitor voltage at t = 0 (default 0).
    pub initial_voltage: Option<Volts>,
}

/// Two-switch forward.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct TwoSwitch {
    /// High-side switch, gated with the main switch.
    pub high_side: Switch,
    /// Each of the two clamp diodes.
    pub clamp_diode: Diode,
}

/// Active clamp.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ActiveClamp {
    /// Auxiliary switch.
    pub aux_switch: Switch,
    /// Clamp capacitor.
    pub capacitor: Capacitor,
    /// Clamp capacitor voltage at t = 0 (default 0).
    pub initial_voltage: Option<Volts>,
}

/// Time settings.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Analysis {
    /// End of the run.
    pub stop_time: Seconds,
    /// Waveform output interval (switching instants are saved too).
    pub sample_interval: Seconds,
    /// Initial state (default "zero").
    pub start: Option<Start>,
}

/// Initial state of the run.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum Start {
    /// Every inductor current and capacitor voltage at zero: a cold start.
    Zero,
    /// The periodic steady state of the initial operating point (found by shooting);
    /// soft starts do not apply.
    Steady,
    /// Deprecated: the dynamic states in the simulator's state order, SI units. Use
    /// `values`.
    States(Vec<f64>),
    /// Initial values by state name: an inductor's current ("3.2 A") or a
    /// capacitor's voltage ("5 V") under the element's name (`lout`, `cout`,
    /// `clamp.c`, `ctl.ea.c1`); `stepflux check` lists the names. States not named
    /// start at their usual initial values.
    Values(BTreeMap<String, StateValue>),
}

/// A state's value: a plain SI number, or a string with amperes or volts.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(untagged)]
pub enum StateValue {
    /// SI number.
    Number(f64),
    /// With its unit, e.g. "3.2 A", "480 mV".
    Text(String),
}

/// A change of operating point at a set time.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum Disturbance {
    /// The load current sink moves to a new value.
    LoadCurrent(LoadCurrentStep),
    /// The load resistor is replaced by a new value at once.
    LoadResistance(LoadResistanceStep),
    /// The input voltage moves to a new value.
    Line(LineStep),
    /// The controller reference moves to a new value.
    Reference(ReferenceStep),
}

/// Load current change.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct LoadCurrentStep {
    /// When it starts.
    pub time: Seconds,
    /// New sink current.
    pub to: Amperes,
    /// Slew rate (omit or 0 for an instant step).
    pub slew: Option<AmperesPerSecond>,
}

/// Load resistance change.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct LoadResistanceStep {
    /// When it happens.
    pub time: Seconds,
    /// New load resistance.
    pub to: Ohms,
}

/// Input voltage change.
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct LineStep {
    /// When it starts.
    pub time: Seconds,
    /// New input voltage.
    pub to: Volts,
    /// Slew rate (omit or 0 for an instant step).
    pub slew: Option<VoltsPerSecond>,
}

/// Reference change (controller drive only).
#[derive(Debug, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct ReferenceStep {
    /// When it starts.
    pub time: Seconds,
    /// New reference voltage.
    pub to: Volts,
    /// Slew rate (omit or 0 for an instant step).
    pub slew: Option<VoltsPerSecond>,
}

/// Specification limits; each omitted limit is not checked. Each is named after the
/// figure it bounds.
#[derive(Debug, Default, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Limits {
    /// Highest start-up overshoot, percent of the set point (`startup.overshoot_pct`).
    #[serde(alias = "startup_overshoot_percent")]
    pub startup_overshoot_pct: Option<Ratio>,
    /// Longest start-up time to 90 % of the set point (`startup.t90`).
    #[serde(alias = "startup_time")]
    pub startup_t90: Option<Seconds>,
    /// Largest deviation after a load or line step, percent of the set point (the
    /// larger of `load_stepN.undershoot_pct` and `load_stepN.overshoot_pct`).
    #[serde(alias = "step_deviation_percent")]
    pub step_deviation_pct: Option<Ratio>,
    /// Longest recovery into the band after a step (`load_stepN.recovery`).
    #[serde(alias = "recovery_time")]
    pub step_recovery: Option<Seconds>,
    /// Recovery band, percent of the set point (default 1 %; `load_stepN.band_pct`).
    #[serde(alias = "recovery_band_percent")]
    pub step_band_pct: Option<Ratio>,
    /// Largest output ripple, peak to peak (`out.v.ripple_pp`).
    #[serde(alias = "ripple")]
    pub ripple_pp: Option<Volts>,
    /// Smallest reset margin, percent of the period (`reset_check.worst.reset_margin_pct`).
    #[serde(alias = "reset_margin_percent")]
    pub reset_margin_pct: Option<Ratio>,
    /// Smallest flux-density margin below Bsat, percent
    /// (`reset_check.worst.flux_margin_pct`).
    #[serde(alias = "flux_margin_percent")]
    pub flux_margin_pct: Option<Ratio>,
    /// Lowest power-stage efficiency over the final window, percent (`efficiency.stage`).
    #[serde(alias = "efficiency_percent")]
    pub efficiency_pct: Option<Ratio>,
    /// Smallest phase margin of the loop gain at the steady state, degrees.
    pub phase_margin_degrees: Option<f64>,
    /// Smallest gain margin of the loop gain at the steady state, dB.
    pub gain_margin_db: Option<f64>,
    /// Lowest loop-gain crossover frequency.
    pub crossover_min: Option<Hertz>,
    /// Highest loop-gain crossover frequency.
    pub crossover_max: Option<Hertz>,
}
