//! Errors of the models crate: a field path, the value and what is allowed, or an
//! engine failure with the model's context.

use stepflux_engine::EngineError;
use thiserror::Error;

/// What building or running a converter model can fail at.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum ModelError {
    /// A design value is out of range.
    #[error("{field} = {value} is not allowed; expected {allowed}")]
    OutOfRange {
        /// Dotted path of the field.
        field: String,
        /// The value given.
        value: f64,
        /// What is allowed.
        allowed: String,
    },
    /// The design is inconsistent as a whole (e.g. a duty above the reset limit).
    #[error("{0}")]
    Infeasible(String),
    /// The core ran away past its saturation knee: the design failed, and the run was
    /// stopped there.
    #[error("{0}")]
    Runaway(#[from] crate::runaway::Runaway),
    /// The engine refused the circuit or failed during the run.
    #[error("simulation: {0}")]
    Engine(#[from] EngineError),
}
