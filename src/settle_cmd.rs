//! `stepflux settle SCENARIO`: the steady operating point of a scenario's initial
//! operating point — every state by name, output mean and ripple, duty, efficiency and
//! loss breakdown, reset margin, flux and stress peaks — as text or `--json`.
//!
//! The steady state is found by shooting ([`stepflux_models::job::steady`]); the figures that need a
//! waveform (ripple, the exact energy balance) come from a short run started there:
//! [`SETTLED_PERIODS`] periods without the scenario's disturbances, measured by the same
//! pipeline as `stepflux run` over its steady window.

use std::path::Path;

use anyhow::{anyhow, Context, Result};
use serde::Serialize;

use crate::check::eng;
use crate::exit::{Exit, ExitWith, Failure};
use crate::job::{Drive, Job, NamedState, Start};
use crate::pipeline::{run_job_with, RunSettings};
use crate::scenario;
use crate::steady::{PeriodFigures, SteadyReport};
use crate::summary::Figure;
use stepflux_models::job::plan::period;
use stepflux_models::job::steady::find_with_cycle;

/// Periods run from the steady state to measure it (the pipeline's steady window is
/// the last 20 of them).
pub const SETTLED_PERIODS: f64 = 40.0;
/// Samples per period of that run: enough for the ripple's peaks to within 0.1 % of a
/// period.
const SAMPLES_PER_PERIOD: f64 = 1000.0;

/// The steady operating point of one job.
#[derive(Clone, Debug, Serialize)]
pub struct OperatingPoint {
    /// Scenario name.
    pub scenario: String,
    /// Input voltage, volts.
    pub line_v: f64,
    /// States at the period boundary and how they were found.
    pub steady_state: SteadyReport,
    /// Duty, reset margin and peaks of one steady period.
    pub period: PeriodFigures,
    /// The run's measurements: output mean and ripple, powers, efficiency, losses by
    /// class and element (SI units).
    #[serde(serialize_with = "crate::writers::figure_json::serialize_figures")]
    pub measurements: Vec<Figure>,
}

impl OperatingPoint {
    /// A measurement by name.
    pub fn get(&self, name: &str) -> Option<f64> {
        self.measurements
            .iter()
            .find(|f| f.key == name)
            .and_then(Figure::number)
    }
}

/// Finds and measures the steady operating point of `job` (its disturbances ignored).
pub fn operating_point(job: &Job) -> Result<OperatingPoint> {
    let (steady, cycle) = find_with_cycle(job)
        .map_err(|e| anyhow!(e))
        .with_context(|| format!("finding the steady state of '{}'", job.name))?;
    let mut run = job.clone();
    run.disturbances.clear();
    let t = period(job);
    run.analysis.stop_time = SETTLED_PERIODS * t;
    run.analysis.sample_interval = t / SAMPLES_PER_PERIOD;
    run.analysis.start = Start::Named(
        steady
            .named()
            .into_iter()
            .map(|(name, value)| NamedState {
                name,
                value,
                unit: None,
            })
            .collect(),
    );
    if let Drive::Controller(spec) = &run.drive {
        run.drive = Drive::Controller(stepflux_models::steady::map::settled_spec(spec));
    }
    let out = run_job_with(
        &run,
        Path::new("."),
        &|_| {},
        RunSettings {
            waveforms: false,
            stop: Some(crate::interrupt::flag()),
        },
    )?;
    Ok(OperatingPoint {
        scenario: job.name.clone(),
        line_v: job.design.input.voltage,
        steady_state: SteadyReport::from(&steady),
        period: PeriodFigures::from(&cycle),
        measurements: out.summary.measurements,
    })
}

/// The command.
pub fn settle(path: &Path, as_json: bool) -> Result<(), Failure> {
    let loaded = scenario::load(path)
        .context("scenario is not valid")
        .exit_with(Exit::BadInput)?;
    let point = operating_point(&loaded.job).exit_with(Exit::SimulationFailed)?;
    if as_json {
        let text = serde_json::to_string_pretty(&point)
            .context("formatting the report")
            .exit_with(Exit::SimulationFailed)?;
        println!("{text}");
    } else {
        print!("{}", report_text(&point));
    }
    Ok(())
}

fn line(out: &mut String, label: &str, value: String) {
    out.push_str(&format!("  {label:<34} {value}\n"));
}

fn figure(p: &OperatingPoint, name: &str, unit: &str) -> String {
    p.get(name).map_or_else(|| "-".into(), |v| eng(v, unit))
}

/// The operating point for people: engineering units.
pub fn report_text(p: &OperatingPoint) -> String {
    let s = &p.steady_state;
    let mut out = format!(
        "{}: steady state at {} input, found in {} periods ({} Jacobians), largest \
         Floquet multiplier {:.4}\n",
        p.scenario,
        eng(p.line_v, "V"),
        s.periods,
        s.jacobians,
        s.spectral_radius
    );
    out.push_str("states at the period boundary:\n");
    for v in &s.states {
        let value = match v.unit {
            "" => format!("{:.6}", v.value),
            u => eng(v.value, u),
        };
        line(&mut out, &format!("{} ({})", v.name, v.kind), value);
    }
    out.push_str("operating point:\n");
    line(&mut out, "output mean", figure(p, "out.v.mean", "V"));
    line(
        &mut out,
        "output ripple (pk-pk)",
        figure(p, "out.v.ripple_pp", "V"),
    );
    line(
        &mut out,
        "inductor ripple (pk-pk)",
        figure(p, "lout.i.ripple_pp", "A"),
    );
    line(&mut out, "duty", format!("{:.4}", p.period.duty));
    line(
        &mut out,
        "reset margin",
        p.period
            .reset_margin
            .map_or("reset path conducting at turn-on".into(), |m| {
                format!("{:.2} % of the period", 100.0 * m)
            }),
    );
    line(
        &mut out,
        "magnetising current peak",
        eng(p.period.mag_current_peak_a, "A"),
    );
    line(
        &mut out,
        "flux density peak",
        eng(p.period.flux_density_peak_t, "T"),
    );
    line(
        &mut out,
        "drain voltage peak",
        eng(p.period.drain_peak_v, "V"),
    );
    line(&mut out, "input power", figure(p, "power.in", "W"));
    line(&mut out, "output power", figure(p, "power.out", "W"));
    line(
        &mut out,
        "efficiency, power stage",
        percent(p.get("efficiency.stage")),
    );
    line(
        &mut out,
        "efficiency, with bias",
        percent(p.get("efficiency.with_bias")),
    );
    out.push_str("losses:\n");
    for f in p.measurements.iter().filter(|f| f.key.starts_with("loss.")) {
        line(
            &mut out,
            &f.key["loss.".len()..],
            f.number().map_or("-".into(), |v| eng(v, "W")),
        );
    }
    out
}

fn percent(v: Option<f64>) -> String {
    v.map_or("-".into(), |v| format!("{:.2} %", 100.0 * v))
}
