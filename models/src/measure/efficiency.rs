//! Losses, efficiency and the energy balance over a window between two snapshots.
//!
//! Powers are energy differences over the window divided by its length, so they are
//! exact averages (the meters are exact integrals), whatever the waveforms did inside.
//! Efficiency of the power stage is P_out/P_in; of the whole converter,
//! P_out/(P_in + P_bias) with the controller's bias power P_bias (a fixed figure the
//! designer supplies, watts), which is why it falls at light load: the bias stays while
//! P_out shrinks.
//!
//! The modelled part losses ([`super::PartLosses`]) join the account: transition and
//! core loss are drawn from the input, so they are added to P_in and to the switch and
//! core classes (the balance is unchanged: both sides grow alike); the gate drive is
//! supplied with the bias, P_out/(P_in + P_gate + P_bias).

use super::catalogue::figures;
use super::losses::{EnergySnapshot, LossClass, LossMeters};
use super::part_losses::PartEnergies;
use super::Figure;
use crate::error::ModelError;

figures! {
    WINDOW_START = "energy.window_start", "s", Instant, Neither, Files,
        "energy window from", "Start of the steady window the energy balance is taken over.";
    WINDOW_END = "energy.window_end", "s", Instant, Neither, Files,
        "energy window to", "End of the steady window the energy balance is taken over.";
    POWER_IN = "power.in", "W", Number, Neither, Files,
        "input power", "Mean power drawn from the input over the steady window.";
    POWER_OUT = "power.out", "W", Number, Neither, Files,
        "output power", "Mean power delivered to the load over the steady window.";
    LOSS_TOTAL = "power.loss_total", "W", Number, Higher, Steady,
        "losses", "Mean power dissipated in the converter over the steady window.";
    STORED_CHANGE = "power.stored_change", "W", Number, Neither, Files,
        "stored-energy change", "Change of stored energy over the window divided by its length.";
    BALANCE_ERROR = "power.balance_error", "W", Number, Magnitude, Files,
        "energy balance error", "Input minus output, losses and stored change: zero for an exact balance.";
    LOSS_CLASS = "loss.*", "W", Number, Higher, Files,
        "loss", "Mean loss of one class of element over the steady window.";
    COSS_TURN_ON = "loss.switch.coss_turn_on", "W", Number, Higher, Files,
        "switch capacitance loss", "Main switch's output-capacitance turn-on loss, mean power.";
    SWITCH_CONDUCTION = "loss.switch.conduction", "W", Number, Higher, Files,
        "switch conduction loss", "Main switch's conduction loss, mean power.";
    TRANSITION = "loss.switch.transition", "W", Number, Higher, Files,
        "switch transition loss", "Main switch's turn-on and turn-off transition loss, mean power (½·V·I·t per transition, or the given energies).";
    STEINMETZ = "loss.core.steinmetz", "W", Number, Higher, Files,
        "core loss", "Core loss by the Steinmetz equation k·f^α·B̂^β·V per cycle, mean power.";
    GATE_DRIVE = "loss.gate_drive", "W", Number, Higher, Files,
        "gate drive", "Gate-drive power Qg·Vdrive·f, supplied with the bias.";
    LOSS_ELEMENT = "loss.*.*", "W", Number, Higher, Files,
        "loss", "Mean loss of one element over the steady window.";
    EFFICIENCY_STAGE = "efficiency.stage", "1", Fraction, Lower, Steady,
        "efficiency (power stage)", "Output power over input power of the power stage.";
    BIAS_POWER = "bias_power", "W", Number, Neither, Files,
        "bias power", "Fixed controller and bias power, as given.";
    EFFICIENCY_WITH_BIAS = "efficiency.with_bias", "1", Fraction, Lower, Steady,
        "efficiency (with bias)", "Output power over input power plus the fixed bias power.";
}

/// Energies over a window, by element and class.
#[derive(Clone, Debug, PartialEq)]
pub struct LossReport {
    /// Window start and end, seconds.
    pub window: (f64, f64),
    /// Energy per metered element over the window: (name, class, joules).
    pub elements: Vec<(String, LossClass, f64)>,
    /// Change of the energy stored in the power stage, joules.
    pub stored_change: f64,
    /// Energy the main switch's Coss released at turn-on (part of
    /// [`LossClass::Switch`]), joules.
    pub coss_turn_on: f64,
    /// Modelled part losses over the window (not in the metered elements), joules.
    pub parts: PartEnergies,
}

impl LossReport {
    /// The report between snapshots `a` and `b` of the same run, with the Coss
    /// turn-on energy counted over the same window (0 if not measured).
    pub fn between(
        meters: &LossMeters,
        a: &EnergySnapshot,
        b: &EnergySnapshot,
        coss_turn_on: f64,
    ) -> Result<Self, ModelError> {
        let n = meters.entries.len();
        if !(b.time > a.time && a.energies.len() == n && b.energies.len() == n) {
            return Err(ModelError::Infeasible(format!(
                "loss report: snapshots at {} s and {} s are not an increasing pair of this account",
                a.time, b.time
            )));
        }
        let elements = meters
            .entries
            .iter()
            .zip(a.energies.iter().zip(&b.energies))
            .map(|(e, (ea, eb))| (e.element.clone(), e.class, eb - ea))
            .collect();
        Ok(LossReport {
            window: (a.time, b.time),
            elements,
            stored_change: b.stored - a.stored,
            coss_turn_on,
            parts: PartEnergies::default(),
        })
    }

    /// The report with the modelled part losses over the same window.
    pub fn with_parts(mut self, parts: PartEnergies) -> Self {
        self.parts = parts;
        self
    }

    /// Energy of the modelled losses drawn from the input (transitions and core),
    /// joules.
    fn parts_from_input(&self) -> f64 {
        self.parts.transition + self.parts.core
    }

    /// Window length, seconds.
    pub fn duration(&self) -> f64 {
        self.window.1 - self.window.0
    }

    /// Energy of one class over the window, joules: the metered elements, and for the
    /// input, switch and core classes the modelled transition and core losses.
    pub fn class_energy(&self, class: LossClass) -> f64 {
        let modelled = match class {
            LossClass::Input => self.parts_from_input(),
            LossClass::Switch => self.parts.transition,
            LossClass::Core => self.parts.core,
            _ => 0.0,
        };
        self.elements
            .iter()
            .filter(|e| e.1 == class)
            // A fold from +0, not `sum`, whose empty value is −0.
            .fold(modelled, |acc, e| acc + e.2)
    }

    /// Average power of one class, watts.
    pub fn class_power(&self, class: LossClass) -> f64 {
        self.class_energy(class) / self.duration()
    }

    /// Average input power, watts.
    pub fn input_power(&self) -> f64 {
        self.class_power(LossClass::Input)
    }

    /// Average power into the load, watts.
    pub fn output_power(&self) -> f64 {
        self.class_power(LossClass::Output)
    }

    /// Average total loss, watts.
    pub fn loss_power(&self) -> f64 {
        LossClass::ALL
            .iter()
            .filter(|c| c.is_loss())
            .map(|&c| self.class_power(c))
            .sum()
    }

    /// Main-switch conduction: the switch class minus the Coss turn-on energy and the
    /// modelled transitions, watts.
    pub fn switch_conduction_power(&self) -> f64 {
        (self.class_energy(LossClass::Switch) - self.coss_turn_on - self.parts.transition)
            / self.duration()
    }

    /// Gate-drive power, watts (supplied with the bias, not by the input).
    pub fn gate_drive_power(&self) -> f64 {
        self.parts.gate_drive / self.duration()
    }

    /// Average rate of change of stored energy, watts.
    pub fn stored_power(&self) -> f64 {
        self.stored_change / self.duration()
    }

    /// P_in − P_out − Σ losses − dE_stored/dt, watts: zero but for rounding when every
    /// element is accounted for.
    pub fn balance_error(&self) -> f64 {
        self.input_power() - self.output_power() - self.loss_power() - self.stored_power()
    }

    /// Power-stage efficiency P_out/P_in.
    pub fn efficiency(&self) -> f64 {
        self.output_power() / self.input_power()
    }

    /// Whole-converter efficiency with a fixed controller bias power `bias` watts and
    /// the gate drive: P_out/(P_in + P_gate + P_bias).
    pub fn efficiency_with_bias(&self, bias: f64) -> f64 {
        self.output_power() / (self.input_power() + self.gate_drive_power() + bias)
    }

    /// Every figure: powers, losses by class and element, balance, efficiencies.
    pub fn figures(&self, bias: f64) -> Vec<Figure> {
        let mut f = vec![
            WINDOW_START.of(self.window.0),
            WINDOW_END.of(self.window.1),
            POWER_IN.of(self.input_power()),
            POWER_OUT.of(self.output_power()),
            LOSS_TOTAL.of(self.loss_power()),
            STORED_CHANGE.of(self.stored_power()),
            BALANCE_ERROR.of(self.balance_error()),
        ];
        for c in LossClass::ALL.iter().filter(|c| c.is_loss()) {
            f.push(LOSS_CLASS.scoped(&[c.name()], self.class_power(*c)));
        }
        f.push(COSS_TURN_ON.of(self.coss_turn_on / self.duration()));
        f.push(SWITCH_CONDUCTION.of(self.switch_conduction_power()));
        f.push(TRANSITION.of(self.parts.transition / self.duration()));
        f.push(STEINMETZ.of(self.parts.core / self.duration()));
        f.push(GATE_DRIVE.of(self.gate_drive_power()));
        for (name, class, e) in self.elements.iter().filter(|e| e.1.is_loss()) {
            f.push(LOSS_ELEMENT.scoped(&[class.name(), name], e / self.duration()));
        }
        f.push(EFFICIENCY_STAGE.of(self.efficiency()));
        f.push(BIAS_POWER.of(bias));
        f.push(EFFICIENCY_WITH_BIAS.of(self.efficiency_with_bias(bias)));
        f
    }
}
