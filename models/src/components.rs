//! Components as a designer enters them: SI values plus the parasitics that matter.
//!
//! Every field carries its unit in its doc comment. A zero parasitic (leakage,
//! resistance, capacitance) means "leave the element out", which keeps the state count
//! down; [`crate::ModelError`] reports values out of range with the field's name.

use crate::error::ModelError;

/// Transformer of a forward converter.
#[derive(Clone, Debug, PartialEq)]
pub struct Transformer {
    /// Primary turns Np.
    pub primary_turns: f64,
    /// Secondary turns Ns.
    pub secondary_turns: f64,
    /// Reset (tertiary) winding turns Nr; used by the reset-winding scheme only.
    pub reset_turns: f64,
    /// Magnetising inductance referred to the primary, henries.
    pub magnetising_inductance: f64,
    /// Primary leakage inductance, henries (0 = none).
    pub primary_leakage: f64,
    /// Secondary leakage inductance, henries (0 = none).
    pub secondary_leakage: f64,
    /// Reset winding leakage inductance, henries (0 = none).
    pub reset_leakage: f64,
    /// Primary winding resistance, ohms (0 = none).
    pub primary_resistance: f64,
    /// Secondary winding resistance, ohms (0 = none).
    pub secondary_resistance: f64,
    /// Reset winding resistance, ohms (0 = none).
    pub reset_resistance: f64,
    /// Core effective area Ae, square metres.
    pub core_area: f64,
    /// Saturation flux density Bsat, tesla.
    pub saturation_flux_density: f64,
    /// Optional two-slope saturation: incremental inductance above the knee, henries.
    /// The knee is where B reaches Bsat: i_knee = Bsat·Np·Ae / Lm.
    pub saturated_inductance: Option<f64>,
    /// Optional core loss by the Steinmetz equation (None = no core loss).
    pub core_loss: Option<CoreLoss>,
}

/// Core loss by the Steinmetz equation, P = k·f^α·B̂^β·V_core (C. P. Steinmetz, "On the
/// law of hysteresis", Trans. AIEE 9, 1892, with the frequency term of later practice).
///
/// Form used: the classical one, per switching cycle, with f = 1/T of that cycle and B̂
/// half the peak-to-peak swing of the simulated flux density over the cycle (its exact
/// extremes from the trace). It is the form core data sheets fit k, α, β to under
/// sinusoidal flux; for the triangular flux of a forward converter it is a first
/// estimate (it leaves out the dependence on the duty that the improved generalized
/// form of Venkatachalam et al., COMPEL 2002, adds), which is not adopted here.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CoreLoss {
    /// Coefficient k, watts per cubic metre at f = 1 Hz and B̂ = 1 T.
    pub k: f64,
    /// Frequency exponent α.
    pub alpha: f64,
    /// Flux-density exponent β.
    pub beta: f64,
    /// Effective core volume V_core, cubic metres.
    pub volume: f64,
}

impl CoreLoss {
    /// Loss power at frequency `f` hertz and peak flux density `b_peak` tesla, watts.
    pub fn power(&self, f: f64, b_peak: f64) -> f64 {
        self.k * f.powf(self.alpha) * b_peak.abs().powf(self.beta) * self.volume
    }

    pub(crate) fn validate(&self, field: &str) -> Result<(), ModelError> {
        positive(&format!("{field}.k"), self.k)?;
        positive(&format!("{field}.volume"), self.volume)?;
        for (name, v) in [("alpha", self.alpha), ("beta", self.beta)] {
            if !(v.is_finite() && v > 0.0 && v <= 4.0) {
                return Err(ModelError::OutOfRange {
                    field: format!("{field}.{name}"),
                    value: v,
                    allowed: "an exponent above 0 and at most 4".into(),
                });
            }
        }
        Ok(())
    }
}

impl Transformer {
    /// Magnetising current at which B reaches Bsat, amperes.
    pub fn knee_current(&self) -> f64 {
        self.saturation_flux_density * self.primary_turns * self.core_area
            / self.magnetising_inductance
    }

    /// Tesla per ampere of magnetising current: B = Lm·i / (Np·Ae) (Faraday's law with
    /// λ = Lm·i referred to the primary).
    pub fn tesla_per_amp(&self) -> f64 {
        self.magnetising_inductance / (self.primary_turns * self.core_area)
    }

    pub(crate) fn validate(&self) -> Result<(), ModelError> {
        positive("transformer.primary_turns", self.primary_turns)?;
        positive("transformer.secondary_turns", self.secondary_turns)?;
        non_negative("transformer.reset_turns", self.reset_turns)?;
        positive(
            "transformer.magnetising_inductance",
            self.magnetising_inductance,
        )?;
        for (f, v) in [
            ("transformer.primary_leakage", self.primary_leakage),
            ("transformer.secondary_leakage", self.secondary_leakage),
            ("transformer.reset_leakage", self.reset_leakage),
            ("transformer.primary_resistance", self.primary_resistance),
            (
                "transformer.secondary_resistance",
                self.secondary_resistance,
            ),
            ("transformer.reset_resistance", self.reset_resistance),
        ] {
            non_negative(f, v)?;
        }
        positive("transformer.core_area", self.core_area)?;
        positive(
            "transformer.saturation_flux_density",
            self.saturation_flux_density,
        )?;
        if let Some(c) = &self.core_loss {
            c.validate("transformer.core_loss")?;
        }
        if let Some(ls) = self.saturated_inductance {
            positive("transformer.saturated_inductance", ls)?;
            if ls >= self.magnetising_inductance {
                return Err(ModelError::OutOfRange {
                    field: "transformer.saturated_inductance".into(),
                    value: ls,
                    allowed: "less than the magnetising inductance".into(),
                });
            }
        }
        Ok(())
    }
}

/// A primary (or clamp) switch.
#[derive(Clone, Debug, PartialEq)]
pub struct Switch {
    /// On resistance, ohms.
    pub r_on: f64,
    /// Off resistance (leakage), ohms.
    pub r_off: f64,
    /// Output capacitance Coss, farads (0 = none).
    pub output_capacitance: f64,
    /// Body diode, if modelled.
    pub body_diode: Option<Diode>,
    /// Drain–source voltage rating, volts (for checks).
    pub voltage_rating: f64,
    /// Optional switching-transition loss of the main switch (None = none). The
    /// simulated switch changes state in one tick; this accounts for the overlap of
    /// voltage and current a real device has while it changes.
    pub transitions: Option<Transitions>,
    /// Optional gate-drive loss of the main switch (None = none).
    pub gate_drive: Option<GateDrive>,
}

/// How the main switch's transition loss is figured, per turn-on and turn-off.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Transitions {
    /// From the transition times, by the linear-ramp overlap of common practice:
    /// E = ½·V·I·t per transition, so ½·V·I·(t_r + t_f)·f per pair at equal V and I.
    /// V and I are the simulated switch's own at each instant (see
    /// [`crate::measure::PartLosses`]).
    Times {
        /// Turn-on (current rise, voltage fall) time, seconds.
        rise_time: f64,
        /// Turn-off (voltage rise, current fall) time, seconds.
        fall_time: f64,
    },
    /// A fixed energy per transition, joules (from a device's switching-energy figures
    /// at the operating point).
    Energy {
        /// Energy per turn-on, joules.
        turn_on: f64,
        /// Energy per turn-off, joules.
        turn_off: f64,
    },
}

/// The gate driver: each turn-on charges the gate with Qg from V_drive, and the charge
/// is dumped at turn-off, so the driver supplies Qg·V_drive per cycle: P = Qg·V_drive·f
/// (common practice).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GateDrive {
    /// Total gate charge Qg at V_drive, coulombs.
    pub charge: f64,
    /// Gate drive voltage, volts.
    pub drive_voltage: f64,
}

impl GateDrive {
    /// Energy the driver supplies per switching cycle, joules.
    pub fn energy_per_cycle(&self) -> f64 {
        self.charge * self.drive_voltage
    }
}

/// A diode: reset, rectifier, freewheel, clamp or body diode.
#[derive(Clone, Debug, PartialEq)]
pub struct Diode {
    /// Forward threshold, volts.
    pub vf: f64,
    /// Forward (dynamic) resistance, ohms.
    pub rd: f64,
    /// Off resistance, ohms.
    pub r_off: f64,
    /// Junction capacitance, farads (0 = none).
    pub junction_capacitance: f64,
    /// Reverse-voltage rating, volts (for checks).
    pub reverse_rating: f64,
}

/// Output inductor.
#[derive(Clone, Debug, PartialEq)]
pub struct Inductor {
    /// Inductance, henries.
    pub inductance: f64,
    /// Winding (DC) resistance, ohms.
    pub dcr: f64,
    /// Saturation current rating, amperes (for checks).
    pub saturation_current: f64,
}

/// A capacitor with its equivalent series resistance.
#[derive(Clone, Debug, PartialEq)]
pub struct Capacitor {
    /// Capacitance, farads.
    pub capacitance: f64,
    /// Equivalent series resistance, ohms (0 = none).
    pub esr: f64,
}

/// Input source with optional LC filter.
#[derive(Clone, Debug, PartialEq)]
pub struct InputSource {
    /// Source voltage, volts.
    pub voltage: f64,
    /// Source resistance, ohms (0 = none).
    pub resistance: f64,
    /// Optional input filter: series inductor then shunt capacitor.
    pub filter: Option<InputFilter>,
    /// Bulk capacitor at the converter input (after the filter), if any.
    pub bulk: Option<Capacitor>,
}

/// Input LC filter.
#[derive(Clone, Debug, PartialEq)]
pub struct InputFilter {
    /// Series inductance, henries.
    pub inductance: f64,
    /// Series inductor resistance, ohms.
    pub resistance: f64,
    /// Shunt capacitor.
    pub capacitor: Capacitor,
}

/// Load on the output: a resistor, a current sink, or both in parallel.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct Load {
    /// Load resistance, ohms (None = no resistor).
    pub resistance: Option<f64>,
    /// Constant-current sink, amperes at t = 0 (None = no sink). Steps are applied by
    /// the caller through the sink's source.
    pub current: Option<f64>,
}

pub(crate) fn positive(field: &str, value: f64) -> Result<(), ModelError> {
    if value.is_finite() && value > 0.0 {
        Ok(())
    } else {
        Err(ModelError::OutOfRange {
            field: field.into(),
            value,
            allowed: "a finite value > 0".into(),
        })
    }
}

pub(crate) fn non_negative(field: &str, value: f64) -> Result<(), ModelError> {
    if value.is_finite() && value >= 0.0 {
        Ok(())
    } else {
        Err(ModelError::OutOfRange {
            field: field.into(),
            value,
            allowed: "a finite value ≥ 0".into(),
        })
    }
}

/// A two-valued resistance is off only when its off value is the larger: otherwise
/// "off" would conduct better than "on" (the engine refuses such an element too).
fn off_above_on(field: &str, r_off: f64, r_on: f64, on_name: &str) -> Result<(), ModelError> {
    if r_off > r_on {
        return Ok(());
    }
    Err(ModelError::OutOfRange {
        field: format!("{field}.r_off"),
        value: r_off,
        allowed: format!("a value above {on_name} = {r_on} Ω"),
    })
}

impl Switch {
    pub(crate) fn validate(&self, field: &str) -> Result<(), ModelError> {
        positive(&format!("{field}.r_on"), self.r_on)?;
        positive(&format!("{field}.r_off"), self.r_off)?;
        off_above_on(field, self.r_off, self.r_on, "r_on")?;
        non_negative(
            &format!("{field}.output_capacitance"),
            self.output_capacitance,
        )?;
        positive(&format!("{field}.voltage_rating"), self.voltage_rating)?;
        if let Some(d) = &self.body_diode {
            d.validate(&format!("{field}.body_diode"))?;
        }
        match self.transitions {
            Some(Transitions::Times {
                rise_time,
                fall_time,
            }) => {
                non_negative(&format!("{field}.transitions.times.rise_time"), rise_time)?;
                non_negative(&format!("{field}.transitions.times.fall_time"), fall_time)?;
            }
            Some(Transitions::Energy { turn_on, turn_off }) => {
                non_negative(&format!("{field}.transitions.energy.turn_on"), turn_on)?;
                non_negative(&format!("{field}.transitions.energy.turn_off"), turn_off)?;
            }
            None => {}
        }
        if let Some(g) = &self.gate_drive {
            positive(&format!("{field}.gate_drive.charge"), g.charge)?;
            positive(
                &format!("{field}.gate_drive.drive_voltage"),
                g.drive_voltage,
            )?;
        }
        Ok(())
    }
}

impl Switch {
    /// As [`Switch::validate`] for a switch other than the main one (a high-side or
    /// auxiliary switch), whose transition and gate losses are not modelled: asking
    /// for them is refused rather than ignored.
    pub(crate) fn validate_other(&self, field: &str) -> Result<(), ModelError> {
        self.validate(field)?;
        for (name, given) in [
            ("transitions", self.transitions.is_some()),
            ("gate_drive", self.gate_drive.is_some()),
        ] {
            if given {
                return Err(ModelError::Infeasible(format!(
                    "{field}.{name}: transition and gate-drive losses are modelled for the                      main switch only; remove it here"
                )));
            }
        }
        Ok(())
    }
}

impl Diode {
    pub(crate) fn validate(&self, field: &str) -> Result<(), ModelError> {
        non_negative(&format!("{field}.vf"), self.vf)?;
        positive(&format!("{field}.rd"), self.rd)?;
        positive(&format!("{field}.r_off"), self.r_off)?;
        off_above_on(field, self.r_off, self.rd, "rd")?;
        non_negative(
            &format!("{field}.junction_capacitance"),
            self.junction_capacitance,
        )?;
        positive(&format!("{field}.reverse_rating"), self.reverse_rating)
    }

    /// The engine's two-valued model of this diode.
    pub fn engine_params(&self) -> stepflux_engine::DiodeParams {
        stepflux_engine::DiodeParams {
            vf: self.vf,
            r_on: self.rd,
            r_off: self.r_off,
        }
    }
}
