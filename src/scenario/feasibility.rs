//! Whole-design checks: build the circuit exactly as a run will (so its probe names and
//! state count are known), compute the paper design figures, and sort what they show
//! into errors (the scenario cannot be simulated as written), design failures (it can,
//! and the paper figures already say the design fails: the run shows how) and warnings
//! (it runs, but look).

use stepflux_engine::{SimOptions, TimeGrid};
use stepflux_models::controller::OutputMode;
use stepflux_models::disturbance::Disturbance;
use stepflux_models::figures::{DesignFigures, DesignPoint};
use stepflux_models::steady::names::{describe_all, StateClass, StateName};
use stepflux_models::template::{ForwardDesign, ResetScheme};
use stepflux_models::ModelError;

use super::error::{ScenarioError, Warning};
use super::validate::Ctx;
use crate::job::{Drive, Job, NamedState, Start};

/// Flux density above this fraction of Bsat is flagged: a margin for Bsat's fall with
/// temperature and part spread (common practice).
const FLUX_WARN: f64 = 0.8;
/// Inductor ripple above this fraction of the load current is flagged: the inductor
/// current runs near discontinuous conduction at this load (common practice).
const RIPPLE_WARN: f64 = 0.5;
/// Switch voltage above this fraction of its rating is flagged: the usual derating
/// for ringing and spikes the steady figure does not include (common practice).
const RATING_WARN: f64 = 0.8;
/// A sample interval rounded to the time grid by more than this fraction is flagged:
/// the rounding then shows in the sixth significant figure of the sample times.
const GRID_WARN: f64 = 1e-6;
/// Sample counts above this per signal are flagged: tens of megabytes per waveform.
const SAMPLES_WARN: f64 = 1e7;

/// The converter as a run builds it ([`stepflux_models::job::build::Built`], which the
/// run goes on from), with its probe names and dynamic states.
pub struct Built {
    /// The build itself.
    pub converter: stepflux_models::job::build::Built,
    /// Probe names in sample order.
    pub probes: Vec<String>,
    /// The dynamic states by name, in the engine's order (the length the deprecated
    /// `analysis.start.states` must have).
    pub states: Vec<StateName>,
}

/// Builds the power stage, the controller's parts and the disturbance branches, as
/// the run will.
pub fn build(job: &Job) -> Result<Built, ModelError> {
    let converter = stepflux_models::job::build::Built::for_job(job)?;
    Ok(Built {
        probes: converter.probe_names(),
        states: converter.states()?,
        converter,
    })
}

/// Checks `signals` names and the length of given initial states against the build.
pub fn check_build(ctx: &Ctx, job: &Job, built: &Built) -> Result<(), ScenarioError> {
    for (k, name) in job.save.iter().enumerate() {
        if !built.probes.contains(name) {
            return Err(ScenarioError::UnknownSignal {
                file: ctx.file.to_string(),
                field: format!("signals[{k}]"),
                name: name.clone(),
                available: built.probes.join(", "),
            });
        }
        if job.save[..k].contains(name) {
            return Err(ctx.range(
                &format!("signals[{k}]"),
                format!("{name:?}"),
                "each signal once",
            ));
        }
    }
    if let Start::States(x) = &job.analysis.start {
        if x.len() != built.states.len() {
            return Err(ctx.range(
                "analysis.start.states",
                format!("{} values", x.len()),
                &format!(
                    "{} values, one per dynamic state of this circuit: {}",
                    built.states.len(),
                    describe_all(&built.states)
                ),
            ));
        }
    }
    if let Start::Named(values) = &job.analysis.start {
        for v in values {
            check_named(ctx, v, &built.states)?;
        }
    }
    Ok(())
}

/// The sample interval as the run will keep it, on its integer time grid (the run's
/// options are those of the drive's clock period), and the grid's tick, seconds.
pub fn sample_interval_on_grid(job: &Job) -> Option<(f64, f64)> {
    let period = match &job.drive {
        Drive::Controller(c) => c.clock_period(),
        Drive::OpenLoop(g) => g.period(),
    };
    let o = SimOptions::for_period(period);
    let grid = TimeGrid::new(o.max_step, o.event_resolution).ok()?;
    let ticks = grid.tick(job.analysis.sample_interval).max(1);
    Some((grid.time(ticks), grid.quantum))
}

/// A named state must exist, and a value written with a unit must have its kind's.
fn check_named(ctx: &Ctx, v: &NamedState, states: &[StateName]) -> Result<(), ScenarioError> {
    let field = format!("analysis.start.values.{}", v.name);
    let Some(state) = states.iter().find(|s| s.name == v.name) else {
        return Err(ctx.range(
            &field,
            format!("{:?}", v.name),
            &format!("a state of this converter: {}", describe_all(states)),
        ));
    };
    let wanted = match state.class {
        StateClass::Current => Some("A"),
        StateClass::Voltage => Some("V"),
        StateClass::Block => None,
    };
    match (v.unit, wanted) {
        (Some(u), Some(w)) if u != w => Err(ctx.range(
            &field,
            format!("{} {u}", v.value),
            &format!("a {} in {w}", state.class.describe()),
        )),
        _ => Ok(()),
    }
}

/// Where the figures are evaluated for `job`.
pub fn design_point(job: &Job) -> DesignPoint {
    let lines =
        std::iter::once(job.design.input.voltage).chain(job.disturbances.iter().filter_map(|d| {
            match d {
                Disturbance::Line { to, .. } => Some(*to),
                _ => None,
            }
        }));
    let (low_line, high_line) =
        lines.fold((f64::MAX, f64::MIN), |(lo, hi), v| (lo.min(v), hi.max(v)));
    match &job.drive {
        Drive::OpenLoop(g) => DesignPoint {
            frequency: g.frequency,
            max_duty: g.duty,
            set_point: None,
            low_line,
            high_line,
        },
        Drive::Controller(c) => DesignPoint {
            // In alternating mode the main switch runs on output A, at half the clock.
            frequency: match c.mode {
                OutputMode::SingleEnded => c.oscillator.frequency,
                OutputMode::Alternating => c.oscillator.frequency / 2.0,
            },
            max_duty: c.max_duty,
            set_point: Some(c.voltage_loop.set_point()),
            low_line,
            high_line,
        },
    }
}

/// What the paper figures say about a design that can be simulated.
#[derive(Clone, Debug, Default)]
pub struct Judgement {
    /// It runs, but look.
    pub warnings: Vec<Warning>,
    /// The design fails by its own figures; a run shows how.
    pub failures: Vec<Warning>,
}

/// Errors that make the scenario impossible to simulate as written, then what the
/// figures say of the design.
pub fn judge(ctx: &Ctx, job: &Job, f: &DesignFigures) -> Result<Judgement, ScenarioError> {
    let point = design_point(job);
    let duty_field = match job.drive {
        Drive::OpenLoop(_) => "drive.open_loop.duty",
        Drive::Controller(_) => "drive.controller.max_duty",
    };
    let mut failures = Vec::new();
    let mut warnings = Vec::new();
    let mut warn = |field: &str, message: String| {
        warnings.push(Warning {
            field: field.to_string(),
            message,
        })
    };
    if matches!(job.analysis.start, Start::States(_)) {
        warn(
            "analysis.start.states",
            "positional initial states are deprecated and break when the circuit changes; \
             give them by name in analysis.start.values (`stepflux check` lists the names)"
                .into(),
        );
    }
    let d = &job.design;
    check_mode(ctx, job)?;
    match (&d.reset, f.reset_limit_duty) {
        (ResetScheme::ResetWinding { .. } | ResetScheme::TwoSwitch { .. }, Some(limit))
            if point.max_duty > limit =>
        {
            failures.push(Warning {
                field: duty_field.into(),
                message: flux_walk_message(job, f, &point, limit),
            })
        }
        (ResetScheme::RcdClamp { .. }, Some(limit)) if point.max_duty > limit => warn(
            duty_field,
            format!(
                "duty {} at low line {} V is above {:.3}, where the RCD clamp's steady \
                 voltage {:.1} V (energy balance) still resets the core: the clamp voltage \
                 will rise and the magnetising current will not return to zero",
                point.max_duty,
                point.low_line,
                limit,
                f.clamp_voltage.unwrap_or(0.0)
            ),
        ),
        _ => {}
    }
    for (field, rating) in switch_ratings(d) {
        if f.drain_stress > rating {
            failures.push(Warning {
                field,
                message: format!(
                    "steady drain voltage {:.1} V (at line {:.1} to {:.1} V) exceeds the \
                     {rating} V rating",
                    f.drain_stress, point.low_line, point.high_line
                ),
            });
            continue;
        }
        if f.drain_stress > RATING_WARN * rating {
            warn(
                &field,
                format!(
                    "steady drain voltage {:.1} V is {:.0} % of the {rating} V rating, above \
                     the usual {:.0} % derating, before any leakage spike",
                    f.drain_stress,
                    100.0 * f.drain_stress / rating,
                    100.0 * RATING_WARN
                ),
            );
        }
    }
    design_warnings(job, f, &point, &mut warn);
    Ok(Judgement { warnings, failures })
}

/// The alternating mode gives every other clock period to output B, which only an
/// active clamp's auxiliary switch could take, and that one must run complementary to
/// the main switch within each period instead. On every template B would drive
/// nothing, so the mode is refused rather than run at half the clock with idle pulses.
fn check_mode(ctx: &Ctx, job: &Job) -> Result<(), ScenarioError> {
    let Drive::Controller(c) = &job.drive else {
        return Ok(());
    };
    if c.mode != OutputMode::Alternating {
        return Ok(());
    }
    let why = match job.design.reset {
        ResetScheme::ActiveClamp { .. } => {
            "an active clamp needs its auxiliary switch complementary to the main one in \
             every period, which the single_ended mode does (with aux_dead_time)"
        }
        _ => {
            "this template has one gate drive (the two-switch stage gates both switches \
             together), so output B, every other clock period, would drive nothing"
        }
    };
    Err(ctx.range(
        "drive.controller.mode",
        "\"alternating\"",
        &format!(
            "\"single_ended\" for the {} template: {why}; max_duty limits each pulse",
            job.design.reset.name()
        ),
    ))
}

/// Why a duty above the reset limit fails, in numbers: each cycle's on-time adds more
/// volt-seconds to the magnetising inductance than the whole off-time at the reset
/// voltage Vin·Np/Nr can take off, so the magnetising current at turn-on grows by
/// ΔI = Vin·T·(D − (1 − D)·Np/Nr)/Lm per cycle at low line (Faraday's law; R. W.
/// Erickson & D. Maksimović, *Fundamentals of Power Electronics*, 2nd ed., §6.3.2),
/// until the core reaches the knee current at Bsat.
fn flux_walk_message(job: &Job, f: &DesignFigures, point: &DesignPoint, limit: f64) -> String {
    let t = &job.design.transformer;
    let nr_np = f.reset_ratio.unwrap_or(1.0);
    let d = point.max_duty;
    let period = 1.0 / point.frequency;
    let walk = point.low_line * period * (d - (1.0 - d) / nr_np) / t.magnetising_inductance;
    let knee = t.knee_current();
    let cycles = ((knee - f.magnetising_peak) / walk).ceil().max(1.0);
    format!(
        "duty {d} is above the {} reset limit {limit:.4} (1/(1 + Nr/Np), Nr/Np = \
         {nr_np:.3}): the core cannot reset within the off-time; at low line {:.1} V the \
         magnetising current at turn-on grows by {:.4} A per cycle and reaches the knee \
         current {knee:.3} A (Bsat) in about {cycles:.0} cycles; a run shows the walk",
        job.design.reset.name(),
        point.low_line,
        walk
    )
}

/// The switches that see the drain stress, with their field paths.
fn switch_ratings(d: &ForwardDesign) -> Vec<(String, f64)> {
    let mut list = vec![(
        "converter.switch.voltage_rating".to_string(),
        d.switch.voltage_rating,
    )];
    match &d.reset {
        ResetScheme::TwoSwitch { high_side, .. } => list.push((
            "converter.reset.two_switch.high_side.voltage_rating".into(),
            high_side.voltage_rating,
        )),
        ResetScheme::ActiveClamp { aux_switch, .. } => list.push((
            "converter.reset.active_clamp.aux_switch.voltage_rating".into(),
            aux_switch.voltage_rating,
        )),
        _ => {}
    }
    list
}

fn design_warnings(
    job: &Job,
    f: &DesignFigures,
    point: &DesignPoint,
    warn: &mut dyn FnMut(&str, String),
) {
    let bsat = job.design.transformer.saturation_flux_density;
    if f.flux_peak > FLUX_WARN * bsat {
        warn(
            "converter.transformer.saturation_flux_density",
            format!(
                "flux density at maximum duty {} and low line {} V reaches {:.3} T, {:.0} % \
                 of Bsat {bsat} T (above {:.0} %)",
                point.max_duty,
                point.low_line,
                f.flux_peak,
                100.0 * f.flux_peak / bsat,
                100.0 * FLUX_WARN
            ),
        );
    }
    if f.load_current <= 0.0 {
        warn(
            "converter.load",
            "no load at t = 0: the output inductor current will be discontinuous".into(),
        );
    } else if f.inductor_ripple > RIPPLE_WARN * f.load_current {
        warn(
            "converter.output_inductor.inductance",
            format!(
                "inductor ripple {:.3} A p-p is {:.0} % of the {:.3} A load (above {:.0} %): \
                 near discontinuous conduction",
                f.inductor_ripple,
                100.0 * f.inductor_ripple / f.load_current,
                f.load_current,
                100.0 * RIPPLE_WARN
            ),
        );
    }
    if let (Some(needed), Some(vo)) = (f.low_line_duty_needed, point.set_point) {
        if needed > point.max_duty {
            warn(
                "drive.controller.max_duty",
                format!(
                    "holding {vo:.3} V at low line {} V needs duty {needed:.3}, above \
                     max_duty {}: the output will fall out of regulation",
                    point.low_line, point.max_duty
                ),
            );
        }
    }
    timing_warnings(job, warn);
}

fn timing_warnings(job: &Job, warn: &mut dyn FnMut(&str, String)) {
    let a = &job.analysis;
    for (k, e) in job.disturbances.iter().enumerate() {
        if e.time() >= a.stop_time {
            warn(
                &format!("disturbances[{k}]"),
                format!(
                    "at {} s, not before stop_time {} s: it never happens",
                    e.time(),
                    a.stop_time
                ),
            );
        }
    }
    if let Some((actual, tick)) = sample_interval_on_grid(job) {
        let off = (actual - a.sample_interval).abs();
        if off > GRID_WARN * a.sample_interval {
            warn(
                "analysis.sample_interval",
                format!(
                    "{:e} s is not on the run's time grid (tick {tick:.4e} s): samples come \
                     every {actual:e} s instead",
                    a.sample_interval
                ),
            );
        }
    }
    let samples = a.stop_time / a.sample_interval;
    if samples > SAMPLES_WARN {
        warn(
            "analysis.sample_interval",
            format!("{samples:.3e} samples per signal: large output files"),
        );
    }
    let lockout = match &job.drive {
        Drive::Controller(c) => c.lockout.as_ref(),
        Drive::OpenLoop(_) => None,
    };
    if let Some(l) = lockout {
        if job.design.input.voltage < l.start {
            warn(
                "drive.controller.lockout.start",
                format!(
                    "input {} V is below the lockout start {} V: the controller will not \
                     switch until a line step raises it",
                    job.design.input.voltage, l.start
                ),
            );
        }
    }
}
