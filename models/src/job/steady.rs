//! The periodic steady state of a job's initial operating point, for `analysis.start:
//! "steady"`, the operating-point and efficiency commands and the loop gain: the
//! shooting method ([`crate::steady`]) on the job's design and drive without its
//! disturbances, on the first event grid where it succeeds.

use stepflux_engine::SimOptions;

use crate::cycles::CycleRecord;
use crate::steady::map::{trial_options, ClosedLoopMap, OpenLoopMap, PeriodMap};
use crate::steady::{shoot, ShootingOptions, SteadyError, SteadyState};
use crate::ModelError;

use super::{Drive, Job};

/// Event resolutions tried, as fractions of the period. A clamp diode that slides along
/// its threshold (the error amplifier resting on its rail at light load) can chatter
/// into the engine's event-storm guard on one grid and not on another; the search then
/// starts again on the next grid. The first is the models' trial grid
/// ([`trial_options`]); the last is ten times finer than a run's default.
const RESOLUTIONS: [f64; 3] = [1e-12, 3e-12, 1e-10];

/// Shoots for the steady state of `job`'s design under its drive (controller soft
/// starts left out, no disturbances), and reads the cycle record of one more period
/// into `cycles`.
fn shoot_job(job: &Job, cycles: &mut Vec<CycleRecord>) -> Result<SteadyState, SteadyError> {
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

fn grid(period: f64, fraction: f64) -> SimOptions {
    SimOptions {
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

/// [`find`], with the cycle record of one more period from the steady state.
pub fn find_with_cycle(job: &Job) -> Result<(SteadyState, CycleRecord), SteadyError> {
    let mut cycles = Vec::new();
    let steady = shoot_job(job, &mut cycles)?;
    let record = cycles.into_iter().next().ok_or_else(|| {
        ModelError::Infeasible("the steady period has no switching cycle (no pulse)".into())
    })?;
    Ok((steady, record))
}
