//! The paper review of a job before it runs: what its closed-form design figures
//! ([`crate::figures::DesignFigures`]) say. A job the engine cannot simulate as written
//! is refused ([`Refusal`]); a design its own figures say fails is a failure (it still
//! runs, and the run shows how); what runs but deserves a look is a warning. Each
//! finding names the job field most to blame by its path in the scenario file.

use crate::controller::OutputMode;
use crate::figures::{DesignFigures, DesignPoint};
use crate::template::{ForwardDesign, ResetScheme};

use super::{Drive, Job, Start};

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

/// A finding of the review, at the field most to blame.
#[derive(Clone, Debug, PartialEq)]
pub struct Finding {
    /// Dotted path of the field in the scenario file.
    pub field: String,
    /// What, with the numbers.
    pub message: String,
}

impl std::fmt::Display for Finding {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}: {}", self.field, self.message)
    }
}

/// Why a job cannot be simulated as written.
#[derive(Clone, Debug, PartialEq)]
pub struct Refusal {
    /// Dotted path of the field in the scenario file.
    pub field: &'static str,
    /// The value found.
    pub value: String,
    /// What is allowed instead.
    pub allowed: String,
}

/// What the paper figures say about a design that can be simulated.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Review {
    /// It runs, but look.
    pub warnings: Vec<Finding>,
    /// The design fails by its own figures; a run shows how.
    pub failures: Vec<Finding>,
}

/// Refuses what cannot be simulated as written, then says what the paper figures show
/// of the design.
pub fn review(job: &Job, f: &DesignFigures) -> Result<Review, Refusal> {
    let point = job.design_point();
    let duty_field = match job.drive {
        Drive::OpenLoop(_) => "drive.open_loop.duty",
        Drive::Controller(_) => "drive.controller.max_duty",
    };
    let mut failures = Vec::new();
    let mut warnings = Vec::new();
    let mut warn = |field: &str, message: String| {
        warnings.push(Finding {
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
    check_mode(job)?;
    match (&d.reset, f.reset_limit_duty) {
        (ResetScheme::ResetWinding { .. } | ResetScheme::TwoSwitch { .. }, Some(limit))
            if point.max_duty > limit =>
        {
            failures.push(Finding {
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
            failures.push(Finding {
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
    Ok(Review { warnings, failures })
}

/// The alternating mode gives every other clock period to output B, which only an
/// active clamp's auxiliary switch could take, and that one must run complementary to
/// the main switch within each period instead. On every template B would drive
/// nothing, so the mode is refused rather than run at half the clock with idle pulses.
fn check_mode(job: &Job) -> Result<(), Refusal> {
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
    Err(Refusal {
        field: "drive.controller.mode",
        value: "\"alternating\"".into(),
        allowed: format!(
            "\"single_ended\" for the {} template: {why}; max_duty limits each pulse",
            job.design.reset.name()
        ),
    })
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
    if let Some((actual, tick)) = job.sample_interval_on_grid() {
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
