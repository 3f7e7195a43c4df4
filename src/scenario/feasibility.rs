//! Whole-design checks in the file's terms: build the circuit exactly as a run will (so
//! its probe names and state count are known, and the signals and named states the file
//! gives can be checked against them), and report the paper review of the design
//! ([`stepflux_models::job::review`]) with the file's name on its refusals.

use stepflux_models::figures::DesignFigures;
use stepflux_models::job::review::{self, Review};
use stepflux_models::steady::names::{describe_all, StateClass, StateName};
use stepflux_models::ModelError;

use super::error::ScenarioError;
use super::validate::Ctx;
use crate::job::{Job, NamedState, Start};

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
    for (k, name) in job.signals.iter().enumerate() {
        if !built.probes.contains(name) {
            return Err(ScenarioError::UnknownSignal {
                file: ctx.file.to_string(),
                field: format!("signals[{k}]"),
                name: name.clone(),
                available: built.probes.join(", "),
            });
        }
        if job.signals[..k].contains(name) {
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

/// Refusals and findings of the paper review ([`review::review`]) in the file's terms.
pub fn judge(ctx: &Ctx, job: &Job, f: &DesignFigures) -> Result<Review, ScenarioError> {
    review::review(job, f).map_err(|r| ctx.range(r.field, r.value, &r.allowed))
}
