//! The periodic steady state of a job's initial operating point, for `analysis.start:
//! "steady"`, `stepflux settle` and `stepflux efficiency`: the models' shooting method
//! ([`stepflux_models::steady`]) on the job's design and drive without its
//! disturbances, written into a run by state name.

use serde::Serialize;
use stepflux_models::steady::map::{trial_options, ClosedLoopMap, OpenLoopMap, PeriodMap};
use stepflux_models::steady::{shoot, ShootingOptions, SteadyError, SteadyState};
use stepflux_models::ModelError;

use crate::job::{Drive, Job};

/// Event resolutions tried, as fractions of the period. A clamp diode that slides along
/// its threshold (the error amplifier resting on its rail at light load) can chatter
/// into the engine's event-storm guard on one grid and not on another; the search then
/// starts again on the next grid. The first is the models' trial grid
/// ([`trial_options`]); the last is ten times finer than a run's default.
const RESOLUTIONS: [f64; 3] = [1e-12, 3e-12, 1e-10];

/// Shoots for the steady state of `job`'s design under its drive (controller soft
/// starts left out, no disturbances), and reads the cycle record of one more period
/// into `cycles`.
fn shoot_job(
    job: &Job,
    cycles: &mut Vec<stepflux_models::cycles::CycleRecord>,
) -> Result<SteadyState, SteadyError> {
    let opts = ShootingOptions::default();
    let mut last = None;
    for fraction in RESOLUTIONS {
        let attempt = |cycles: &mut Vec<_>| -> Result<SteadyState, SteadyError> {
            match &job.drive {
                Drive::OpenLoop(gate) => {
                    let conv = job.design.build()?;
                    let mut map = OpenLoopMap::new(&conv, *gate, grid(gate.period(), fraction))?;
                    let s = shoot(&mut map, &opts)?;
                    map.run_from(&s.x, 1, cycles)?;
                    Ok(s)
                }
                Drive::Controller(spec) => {
                    let t = spec.clock_period();
                    let mut map = ClosedLoopMap::new(&job.design, spec, grid(t, fraction))?;
                    let s = shoot(&mut map, &opts)?;
                    map.run_from(&s.x, 1, cycles)?;
                    Ok(s)
                }
            }
        };
        cycles.clear();
        match attempt(cycles) {
            Err(SteadyError::Model(ModelError::Engine(e))) => {
                last = Some(SteadyError::Model(ModelError::Engine(e)))
            }
            other => return other,
        }
    }
    Err(last.unwrap_or_else(|| ModelError::Infeasible("no event grid tried".into()).into()))
}

fn grid(period: f64, fraction: f64) -> stepflux_engine::SimOptions {
    stepflux_engine::SimOptions {
        event_resolution: fraction * period,
        ..trial_options(period)
    }
}

/// The steady state of `job` (see [`shoot_job`]).
pub fn find(job: &Job) -> Result<SteadyState, SteadyError> {
    shoot_job(job, &mut Vec::new())
}

/// [`find`] with the failure as a model error (the run's error type).
pub fn find_for_run(job: &Job) -> Result<SteadyState, ModelError> {
    find(job).map_err(|e| match e {
        SteadyError::Model(m) => m,
        other => ModelError::Infeasible(format!("steady state: {other}")),
    })
}

/// One state of the steady operating point, for `summary.json` and `--json`.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct StateValue {
    /// Owner element's name.
    pub name: String,
    /// "inductor current", "capacitor voltage" or "block state".
    pub kind: &'static str,
    /// SI unit ("" for a block state).
    pub unit: &'static str,
    /// Value at the period boundary, SI.
    pub value: f64,
}

/// The converged state and how it was found.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct SteadyReport {
    /// Every state by name at the period boundary.
    pub states: Vec<StateValue>,
    /// Period of the map, seconds.
    pub period_s: f64,
    /// Periods simulated to find it.
    pub periods: usize,
    /// Difference Jacobians formed.
    pub jacobians: usize,
    /// Weighted residual norm per accepted iterate (≤ 1: within tolerance).
    pub residual_history: Vec<f64>,
    /// Largest Floquet multiplier modulus (< 1: stable).
    pub spectral_radius: f64,
}

impl From<&SteadyState> for SteadyReport {
    fn from(s: &SteadyState) -> Self {
        SteadyReport {
            states: s
                .names
                .iter()
                .zip(&s.x)
                .map(|(n, &value)| StateValue {
                    name: n.name.clone(),
                    kind: n.class.describe(),
                    unit: n.class.unit(),
                    value,
                })
                .collect(),
            period_s: s.period,
            periods: s.work.periods,
            jacobians: s.work.newton,
            residual_history: s.history.clone(),
            spectral_radius: s.spectral_radius,
        }
    }
}

/// What one steady switching period shows, from its cycle record.
#[derive(Clone, Copy, Debug, Serialize, PartialEq)]
pub struct PeriodFigures {
    /// Main-switch on-time over the period.
    pub duty: f64,
    /// Time from the end of reset to the next turn-on over the period (None: the core
    /// did not reset).
    pub reset_margin: Option<f64>,
    /// Highest magnetising current, amperes.
    pub mag_current_peak_a: f64,
    /// Highest |B|, tesla.
    pub flux_density_peak_t: f64,
    /// Highest drain voltage, volts.
    pub drain_peak_v: f64,
}

/// [`find`], with the figures of one more period from the steady state.
pub fn find_with_period(job: &Job) -> Result<(SteadyState, PeriodFigures), SteadyError> {
    let mut cycles = Vec::new();
    let steady = shoot_job(job, &mut cycles)?;
    let r = cycles.first().ok_or_else(|| {
        ModelError::Infeasible("the steady period has no switching cycle (no pulse)".into())
    })?;
    let figures = PeriodFigures {
        duty: r.duty,
        reset_margin: r.reset_margin().map(|t| t / r.period),
        mag_current_peak_a: r.mag_current_peak,
        flux_density_peak_t: r.b_peak,
        drain_peak_v: r.drain_peak,
    };
    Ok((steady, figures))
}
