//! Second stage of loading: raw scenario → the models' types, with defaults filled in
//! and every range checked. Errors name the field by its path in the file.
//!
//! Ranges the models already check ([`ForwardDesign::validate`],
//! [`ControllerSpec::validate`], [`OpenLoopGate::validate`]) are checked there and the
//! field names mapped to scenario paths, so the rules live in one place; what the
//! models leave to the caller is checked here. The drive's fields are in [`drive`].
//!
//! [`ControllerSpec::validate`]: stepflux_models::controller::ControllerSpec::validate
//! [`OpenLoopGate::validate`]: stepflux_models::gate::OpenLoopGate::validate

use stepflux_models::components::{
    Capacitor, CoreLoss, Diode, GateDrive, Inductor, InputFilter, InputSource, Load, Switch,
    Transformer, Transitions,
};
use stepflux_models::disturbance::Disturbance;
use stepflux_models::template::{ForwardDesign, ResetScheme};
use stepflux_models::ModelError;

use super::error::ScenarioError;
use super::raw;
use crate::job::{Analysis, Drive, Limits, NamedState, Start};
use crate::units::{self, Unit};

mod drive;
pub use drive::drive;

/// Off-state resistance when a file leaves it out, ohms: a leakage figure of the order
/// data sheets give for small power devices (common practice), and high enough against
/// any load in the circuit to read as "off".
pub const DEFAULT_R_OFF: f64 = 10e6;

/// Longest scenario name, characters.
const NAME_MAX: usize = 64;

/// Where errors are reported: the file name as given.
pub struct Ctx<'a> {
    /// File name for messages.
    pub file: &'a str,
}

impl Ctx<'_> {
    /// An out-of-range error at `field`.
    pub fn range(&self, field: &str, value: impl ToString, allowed: &str) -> ScenarioError {
        ScenarioError::OutOfRange {
            file: self.file.to_string(),
            field: field.to_string(),
            value: crate::text::shorten(&value.to_string()),
            allowed: allowed.to_string(),
        }
    }

    /// An infeasibility at `field`.
    pub fn infeasible(&self, field: &str, message: String) -> ScenarioError {
        ScenarioError::Infeasible {
            file: self.file.to_string(),
            field: field.to_string(),
            message,
        }
    }

    /// A model error met while building `field`; out-of-range values keep their own
    /// field, mapped by `map`.
    pub fn model(
        &self,
        field: &str,
        error: ModelError,
        map: &dyn Fn(&str) -> String,
    ) -> ScenarioError {
        match error {
            ModelError::OutOfRange {
                field: f,
                value,
                allowed,
            } => self.range(&map(&f), value, &allowed),
            error => ScenarioError::Model {
                file: self.file.to_string(),
                field: field.to_string(),
                error,
            },
        }
    }

    fn check(
        &self,
        field: &str,
        value: f64,
        ok: bool,
        allowed: &str,
    ) -> Result<f64, ScenarioError> {
        if ok && value.is_finite() {
            Ok(value)
        } else {
            Err(self.range(field, value, allowed))
        }
    }

    /// `value` if it is finite and > 0.
    pub fn positive(&self, field: &str, value: f64) -> Result<f64, ScenarioError> {
        self.check(field, value, value > 0.0, "a finite value > 0")
    }

    /// `value` if it is finite and ≥ 0.
    pub fn non_negative(&self, field: &str, value: f64) -> Result<f64, ScenarioError> {
        self.check(field, value, value >= 0.0, "a finite value ≥ 0")
    }

    /// `value` if it lies in [lo, hi].
    pub fn within(&self, field: &str, value: f64, lo: f64, hi: f64) -> Result<f64, ScenarioError> {
        self.check(
            field,
            value,
            (lo..=hi).contains(&value),
            &format!("{lo} to {hi}"),
        )
    }
}

/// The name, if it is a safe single path component.
pub fn name(ctx: &Ctx, name: &str) -> Result<String, ScenarioError> {
    let allowed = "letters, digits, '-', '_' and '.', not starting with '.', 1 to 64 \
                   characters (it names the output folder)";
    let safe = !name.is_empty()
        && name.chars().count() <= NAME_MAX
        && !name.starts_with('.')
        && name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.'));
    if safe {
        Ok(name.to_string())
    } else {
        Err(ctx.range("name", format!("{name:?}"), allowed))
    }
}

fn or_zero<T: Copy>(v: Option<T>, si: fn(T) -> f64) -> f64 {
    v.map_or(0.0, si)
}

fn diode(d: &raw::Diode) -> Diode {
    Diode {
        vf: d.vf.si(),
        rd: d.r_on.si(),
        r_off: d.r_off.map_or(DEFAULT_R_OFF, |r| r.si()),
        junction_capacitance: or_zero(d.junction_capacitance, |c| c.si()),
        reverse_rating: d.reverse_rating.si(),
    }
}

fn switch(s: &raw::Switch) -> Switch {
    Switch {
        r_on: s.r_on.si(),
        r_off: s.r_off.map_or(DEFAULT_R_OFF, |r| r.si()),
        output_capacitance: or_zero(s.output_capacitance, |c| c.si()),
        body_diode: s.body_diode.as_ref().map(diode),
        voltage_rating: s.voltage_rating.si(),
        transitions: s.transitions.as_ref().map(|t| match t {
            raw::Transitions::Times(t) => Transitions::Times {
                rise_time: t.rise_time.si(),
                fall_time: t.fall_time.si(),
            },
            raw::Transitions::Energy(e) => Transitions::Energy {
                turn_on: e.turn_on.si(),
                turn_off: e.turn_off.si(),
            },
        }),
        gate_drive: s.gate_drive.as_ref().map(|g| GateDrive {
            charge: g.charge.si(),
            drive_voltage: g.drive_voltage.si(),
        }),
    }
}

fn capacitor(c: &raw::Capacitor) -> Capacitor {
    Capacitor {
        capacitance: c.capacitance.si(),
        esr: or_zero(c.esr, |r| r.si()),
    }
}

/// Scenario path of a field the models name (`transformer.reset_turns`, `reset.diode.rd`,
/// `switch.r_on`). The models call a diode's forward resistance `rd`; the scenario calls
/// it `r_on`, as the engine does.
fn design_path(model_field: &str, scheme: &str) -> String {
    if model_field == "transformer.reset_turns" {
        return "converter.reset.reset_winding.turns".into();
    }
    let model_field = match model_field.strip_suffix(".rd") {
        Some(diode) => format!("{diode}.r_on"),
        None => model_field.to_string(),
    };
    match model_field.strip_prefix("reset.") {
        Some(rest) => format!("converter.reset.{scheme}.{rest}"),
        None => format!("converter.{model_field}"),
    }
}

/// The power stage, checked.
pub fn design(ctx: &Ctx, c: &raw::Converter) -> Result<ForwardDesign, ScenarioError> {
    let t = &c.transformer;
    let mut transformer = Transformer {
        primary_turns: t.primary_turns.si(),
        secondary_turns: t.secondary_turns.si(),
        reset_turns: 0.0,
        magnetising_inductance: t.magnetising_inductance.si(),
        primary_leakage: or_zero(t.primary_leakage, |v| v.si()),
        secondary_leakage: or_zero(t.secondary_leakage, |v| v.si()),
        reset_leakage: 0.0,
        primary_resistance: or_zero(t.primary_resistance, |v| v.si()),
        secondary_resistance: or_zero(t.secondary_resistance, |v| v.si()),
        reset_resistance: 0.0,
        core_area: t.core_area.si(),
        saturation_flux_density: t.saturation_flux_density.si(),
        saturated_inductance: t.saturated_inductance.map(|v| v.si()),
        core_loss: t.core_loss.as_ref().map(|c| CoreLoss {
            k: c.k.si(),
            alpha: c.alpha.si(),
            beta: c.beta.si(),
            volume: c.volume.si(),
        }),
    };
    let (reset, scheme) = match &c.reset {
        raw::Reset::ResetWinding(w) => {
            transformer.reset_turns = w.turns.si();
            transformer.reset_leakage = or_zero(w.leakage, |v| v.si());
            transformer.reset_resistance = or_zero(w.resistance, |v| v.si());
            let path = "converter.reset.reset_winding";
            ctx.non_negative(&format!("{path}.leakage"), transformer.reset_leakage)?;
            ctx.non_negative(&format!("{path}.resistance"), transformer.reset_resistance)?;
            (
                ResetScheme::ResetWinding {
                    diode: diode(&w.diode),
                },
                "reset_winding",
            )
        }
        raw::Reset::RcdClamp(r) => {
            let v0 = or_zero(r.initial_voltage, |v| v.si());
            ctx.non_negative("converter.reset.rcd_clamp.initial_voltage", v0)?;
            ctx.non_negative(
                "converter.reset.rcd_clamp.capacitor.esr",
                or_zero(r.capacitor.esr, |v| v.si()),
            )?;
            let reset = ResetScheme::RcdClamp {
                diode: diode(&r.diode),
                resistance: r.resistance.si(),
                capacitor: capacitor(&r.capacitor),
                initial_voltage: v0,
            };
            (reset, "rcd_clamp")
        }
        raw::Reset::TwoSwitch(s) => {
            let reset = ResetScheme::TwoSwitch {
                high_side: switch(&s.high_side),
                clamp_diode: diode(&s.clamp_diode),
            };
            (reset, "two_switch")
        }
        raw::Reset::ActiveClamp(a) => {
            let v0 = or_zero(a.initial_voltage, |v| v.si());
            ctx.non_negative("converter.reset.active_clamp.initial_voltage", v0)?;
            ctx.non_negative(
                "converter.reset.active_clamp.capacitor.esr",
                or_zero(a.capacitor.esr, |v| v.si()),
            )?;
            let reset = ResetScheme::ActiveClamp {
                aux_switch: switch(&a.aux_switch),
                capacitor: capacitor(&a.capacitor),
                initial_voltage: v0,
            };
            (reset, "active_clamp")
        }
    };
    let design = ForwardDesign {
        input: input(ctx, &c.input)?,
        transformer,
        switch: switch(&c.switch),
        reset,
        rectifier: diode(&c.rectifier),
        freewheel: diode(&c.freewheel),
        output_inductor: Inductor {
            inductance: c.output_inductor.inductance.si(),
            dcr: or_zero(c.output_inductor.dcr, |v| v.si()),
            saturation_current: ctx.positive(
                "converter.output_inductor.saturation_current",
                c.output_inductor.saturation_current.si(),
            )?,
        },
        output_capacitor: capacitor(&c.output_capacitor),
        load: Load {
            resistance: c.load.resistance.map(|v| v.si()),
            current: c.load.current.map(|v| v.si()),
        },
    };
    design
        .validate()
        .map_err(|e| ctx.model("converter", e, &|f| design_path(f, scheme)))?;
    Ok(design)
}

fn input(ctx: &Ctx, i: &raw::Input) -> Result<InputSource, ScenarioError> {
    let filter = match &i.filter {
        Some(f) => Some(InputFilter {
            inductance: ctx.positive("converter.input.filter.inductance", f.inductance.si())?,
            resistance: ctx.non_negative(
                "converter.input.filter.resistance",
                or_zero(f.resistance, |v| v.si()),
            )?,
            capacitor: checked_capacitor(ctx, "converter.input.filter.capacitor", &f.capacitor)?,
        }),
        None => None,
    };
    let bulk = match &i.bulk {
        Some(b) => Some(checked_capacitor(ctx, "converter.input.bulk", b)?),
        None => None,
    };
    Ok(InputSource {
        voltage: i.voltage.si(),
        resistance: or_zero(i.resistance, |v| v.si()),
        filter,
        bulk,
    })
}

fn checked_capacitor(
    ctx: &Ctx,
    path: &str,
    c: &raw::Capacitor,
) -> Result<Capacitor, ScenarioError> {
    let c = capacitor(c);
    ctx.positive(&format!("{path}.capacitance"), c.capacitance)?;
    ctx.non_negative(&format!("{path}.esr"), c.esr)?;
    Ok(c)
}

/// The disturbances, checked (in file order; the models sort them by time).
pub fn disturbances(
    ctx: &Ctx,
    list: &[raw::Disturbance],
    drive: &Drive,
) -> Result<Vec<Disturbance>, ScenarioError> {
    list.iter()
        .enumerate()
        .map(|(k, e)| {
            let at = |kind: &str, field: &str| format!("disturbances[{k}].{kind}.{field}");
            let slew = |kind: &str, v: Option<f64>| ctx.non_negative(&at(kind, "slew"), v.unwrap_or(0.0));
            let time = |kind: &str, t: f64| ctx.non_negative(&at(kind, "time"), t);
            Ok(match e {
                raw::Disturbance::LoadCurrent(s) => Disturbance::LoadCurrent {
                    time: time("load_current", s.time.si())?,
                    to: ctx.non_negative(&at("load_current", "to"), s.to.si())?,
                    slew: slew("load_current", s.slew.map(|v| v.si()))?,
                },
                raw::Disturbance::LoadResistance(s) => Disturbance::LoadResistance {
                    time: time("load_resistance", s.time.si())?,
                    to: ctx.positive(&at("load_resistance", "to"), s.to.si())?,
                },
                raw::Disturbance::Line(s) => Disturbance::Line {
                    time: time("line", s.time.si())?,
                    to: ctx.positive(&at("line", "to"), s.to.si())?,
                    slew: slew("line", s.slew.map(|v| v.si()))?,
                },
                raw::Disturbance::Reference(s) => {
                    if !matches!(drive, Drive::Controller(_)) {
                        return Err(ctx.infeasible(
                            &format!("disturbances[{k}].reference"),
                            "a reference step needs the controller drive; open_loop has no reference".into(),
                        ));
                    }
                    Disturbance::Reference {
                        time: time("reference", s.time.si())?,
                        to: ctx.positive(&at("reference", "to"), s.to.si())?,
                        slew: slew("reference", s.slew.map(|v| v.si()))?,
                    }
                }
            })
        })
        .collect()
}

/// Time settings, checked (the state count of `states` is checked once the circuit is
/// built).
pub fn analysis(ctx: &Ctx, a: &raw::Analysis) -> Result<Analysis, ScenarioError> {
    let stop_time = ctx.positive("analysis.stop_time", a.stop_time.si())?;
    let sample_interval = ctx.positive("analysis.sample_interval", a.sample_interval.si())?;
    if sample_interval > stop_time {
        return Err(ctx.range(
            "analysis.sample_interval",
            sample_interval,
            &format!("at most stop_time = {stop_time} s"),
        ));
    }
    let start = match &a.start {
        None | Some(raw::Start::Zero) => Start::Zero,
        Some(raw::Start::Steady) => Start::Steady,
        Some(raw::Start::States(x)) => Start::States(x.clone()),
        Some(raw::Start::Values(v)) => Start::Named(
            v.iter()
                .map(|(name, value)| named_state(ctx, name, value))
                .collect::<Result<_, _>>()?,
        ),
    };
    Ok(Analysis {
        stop_time,
        sample_interval,
        start,
    })
}

/// One named initial state: a number, or text in amperes or volts (which of the two
/// the state needs is checked once the circuit is built).
fn named_state(
    ctx: &Ctx,
    name: &str,
    value: &raw::StateValue,
) -> Result<NamedState, ScenarioError> {
    let field = format!("analysis.start.values.{name}");
    let (value, unit) = match value {
        raw::StateValue::Number(v) => (*v, None),
        raw::StateValue::Text(t) => [(Unit::Ampere, "A"), (Unit::Volt, "V")]
            .iter()
            .find_map(|&(u, sym)| units::parse(t, u).ok().map(|v| (v, Some(sym))))
            .ok_or_else(|| {
                ctx.range(
                    &field,
                    format!("{t:?}"),
                    "a current (\"3.2 A\") or a voltage (\"5 V\")",
                )
            })?,
    };
    let value = ctx.check(&field, value, true, "a finite value")?;
    Ok(NamedState {
        name: name.to_string(),
        value,
        unit,
    })
}

/// Limits, checked: percentages within their natural range, times and ripple positive.
pub fn limits(ctx: &Ctx, l: &raw::Limits) -> Result<Limits, ScenarioError> {
    let pct = |field: &str, v: Option<crate::units::Ratio>, hi: f64| {
        v.map(|v| ctx.within(&format!("limits.{field}"), v.si(), 0.0, hi))
            .transpose()
    };
    let pos = |field: &str, v: Option<f64>| {
        v.map(|v| ctx.positive(&format!("limits.{field}"), v))
            .transpose()
    };
    // Overshoot and deviation may exceed 100 % in a failing design; 1000 % only catches
    // a value typed as a fraction's reciprocal or a stray exponent.
    Ok(Limits {
        startup_overshoot_percent: pct("startup_overshoot_pct", l.startup_overshoot_pct, 1000.0)?,
        startup_time: pos("startup_t90", l.startup_t90.map(|v| v.si()))?,
        step_deviation_percent: pct("step_deviation_pct", l.step_deviation_pct, 1000.0)?,
        recovery_time: pos("step_recovery", l.step_recovery.map(|v| v.si()))?,
        recovery_band_percent: pos("step_band_pct", l.step_band_pct.map(|v| v.si()))?,
        ripple: pos("ripple_pp", l.ripple_pp.map(|v| v.si()))?,
        reset_margin_percent: pct("reset_margin_pct", l.reset_margin_pct, 100.0)?,
        flux_margin_percent: pct("flux_margin_pct", l.flux_margin_pct, 100.0)?,
        efficiency_percent: pct("efficiency_pct", l.efficiency_pct, 100.0)?,
        // A margin below 0 is an unstable loop, never a useful minimum; 180° and 60 dB
        // only catch a stray exponent.
        phase_margin_degrees: l
            .phase_margin_degrees
            .map(|v| ctx.within("limits.phase_margin_degrees", v, 0.0, 180.0))
            .transpose()?,
        gain_margin_db: l
            .gain_margin_db
            .map(|v| ctx.within("limits.gain_margin_db", v, 0.0, 60.0))
            .transpose()?,
        crossover_min: pos("crossover_min", l.crossover_min.map(|v| v.si()))?,
        crossover_max: pos("crossover_max", l.crossover_max.map(|v| v.si()))?,
    })
}
