//! Scenario files: JSON in this project's own format, loaded in two stages — serde
//! types that parse and check units ([`raw`]), then a validated [`Job`]
//! ([`validate`], [`feasibility`]).
//!
//! ```json
//! {
//!   "name": "startup",
//!   "converter": { "input": { "voltage": "24 V" }, "reset": { "reset_winding": { … } }, … },
//!   "drive": { "open_loop": { "frequency": "150 kHz", "duty": 0.3 } },
//!   "analysis": { "stop_time": "2 ms", "sample_interval": "1 us" }
//! }
//! ```
//!
//! `stepflux schema` prints the full JSON Schema; `scenarios/` has worked examples.

mod deprecated;
pub mod document;
mod error;
mod feasibility;
mod locate;
mod practice;
pub mod raw;
mod validate;

use std::path::Path;

use stepflux_models::figures::DesignFigures;

pub use deprecated::same_limit;
pub use error::ScenarioError;
pub use stepflux_models::job::review::Finding;

use crate::job::Job;
use validate::Ctx;

/// A scenario that can run, with what `check` reports about it.
#[derive(Clone, Debug)]
pub struct Loaded {
    /// The validated job.
    pub job: Job,
    /// Design concerns that do not stop the run.
    pub warnings: Vec<Finding>,
    /// Ways the design fails by its own paper figures (the run still simulates it and
    /// shows how; `check` exits 1).
    pub failures: Vec<Finding>,
    /// Paper design figures at the scenario's operating range.
    pub figures: DesignFigures,
    /// Probe names of the converter as built, in sample order.
    pub probes: Vec<String>,
    /// Its dynamic states by name, kind and unit, in the engine's order.
    pub states: Vec<stepflux_models::steady::names::StateName>,
    /// The converter as built for these checks; the run goes on from it.
    pub built: stepflux_models::job::build::Built,
    /// The file name as given, for messages.
    pub file: String,
}

/// Reads and validates the scenario file at `path`.
pub fn load(path: &Path) -> Result<Loaded, ScenarioError> {
    let bytes = std::fs::read(path).map_err(|source| ScenarioError::Read {
        path: path.to_path_buf(),
        source,
    })?;
    let file = path.display().to_string();
    load_str(&document::decode(bytes, &file)?, &file)
}

/// Validates scenario `text`; `file` names it in messages.
pub fn load_str(text: &str, file: &str) -> Result<Loaded, ScenarioError> {
    validated(text, file).map_err(|e| e.located(text))
}

fn validated(text: &str, file: &str) -> Result<Loaded, ScenarioError> {
    let ctx = Ctx { file };
    let raw = parse(text, file)?;
    let design = validate::design(&ctx, &raw.converter)?;
    let drive = validate::drive(&ctx, &raw.drive)?;
    let disturbances = validate::disturbances(&ctx, &raw.disturbances, &drive)?;
    let job = Job {
        name: validate::name(&ctx, &raw.name)?,
        description: raw.description,
        design,
        drive,
        disturbances,
        analysis: validate::analysis(&ctx, &raw.analysis)?,
        limits: validate::limits(&ctx, &raw.limits)?,
        signals: raw.signals,
        bias_power: ctx.non_negative("bias_power", raw.bias_power.map_or(0.0, |w| w.si()))?,
        source_text: text.to_string(),
    };
    practice::check(&ctx, &job)?;
    let built = feasibility::build(&job)
        .map_err(|e| ctx.model("converter", e, &|f| format!("converter.{f}")))?;
    feasibility::check_build(&ctx, &job, &built)?;
    let figures = job.design_figures();
    let judged = feasibility::judge(&ctx, &job, &figures)?;
    let mut warnings = old_names(text);
    warnings.extend(judged.warnings);
    Ok(Loaded {
        job,
        warnings,
        failures: judged.failures,
        figures,
        probes: built.probes,
        states: built.states,
        built: built.converter,
        file: file.to_string(),
    })
}

/// Deprecation warnings for names of the previous release (the text parsed already).
fn old_names(text: &str) -> Vec<Finding> {
    serde_json::from_str(text.trim_start_matches('\u{feff}'))
        .map(|doc| deprecated::warnings(&doc))
        .unwrap_or_default()
}

/// First stage: JSON → raw types, with the field path of any error.
fn parse(text: &str, file: &str) -> Result<raw::Scenario, ScenarioError> {
    document::parse(text, file, "scenario", json_schema)
}

/// The JSON Schema of the format, generated from the same types the loader uses.
pub fn json_schema() -> serde_json::Value {
    serde_json::to_value(schemars::schema_for!(raw::Scenario)).unwrap_or_default()
}

#[cfg(test)]
mod tests;
