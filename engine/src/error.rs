//! The engine's error type. Every variant names the elements, nodes or time involved
//! so a caller can tell the user what to change.

use thiserror::Error;

/// Everything the engine can refuse or fail at. Field meanings are spelled out by
/// each variant's message.
#[allow(missing_docs)]
#[derive(Debug, Error, Clone, PartialEq)]
pub enum EngineError {
    /// Two elements or blocks share a name.
    #[error("duplicate element or block name '{0}'")]
    DuplicateName(String),

    /// A parameter is out of range.
    #[error("{element}: {what} = {value} is not allowed; expected {allowed}")]
    BadValue {
        element: String,
        what: &'static str,
        value: f64,
        allowed: &'static str,
    },

    /// A structural reference is wrong (missing node, block output, winding …).
    #[error("{element}: {problem}")]
    BadReference { element: String, problem: String },

    /// Capacitors and voltage sources form a loop, so one capacitor voltage is not a
    /// free state.
    #[error("capacitor loop: {} form a closed loop of capacitors and voltage sources; add a series resistance", .elements.join(", "))]
    CapacitorLoop { elements: Vec<String> },

    /// Inductors and current sources form a cut-set, so one inductor current is not a
    /// free state.
    #[error("inductor cut-set: {} are the only connections of nodes {}; add a parallel resistance", .elements.join(", "), .nodes.join(", "))]
    InductorCutSet {
        elements: Vec<String>,
        nodes: Vec<String>,
    },

    /// A group of nodes has no connection to the rest of the circuit at all.
    #[error("floating nodes {}: no element connects them to ground (an isolated winding needs a reference)", .nodes.join(", "))]
    FloatingNodes { nodes: Vec<String> },

    /// The nodal equations of one topology are singular.
    #[error("singular nodal equations in topology [{topology}]")]
    SingularTopology { topology: String },

    /// The diode states at one instant do not settle.
    #[error("diode states do not settle at t = {time:e} s: {} keep changing", .elements.join(", "))]
    InconsistentDiodes { time: f64, elements: Vec<String> },

    /// Too many events in too short a time.
    #[error("event storm at t = {time:e} s: {count} events within {window:e} s in topology [{topology}]; last switching elements: {}", .elements.join(", "))]
    EventStorm {
        time: f64,
        count: usize,
        window: f64,
        topology: String,
        elements: Vec<String>,
    },

    /// A run option is out of range.
    #[error("option {what} = {value} is not allowed; expected {allowed}")]
    BadOption {
        what: &'static str,
        value: f64,
        allowed: &'static str,
    },

    /// The cross-check integrator failed.
    #[error("reference integrator failed at t = {time:e} s: {reason}")]
    ReferenceIntegrator { time: f64, reason: String },

    /// The output sink refused a sample (a full disk, a closed pipe …).
    #[error("output sink failed at t = {time:e} s: {message}")]
    Sink { time: f64, message: String },

    /// The state became non-finite.
    #[error("state became non-finite at t = {time:e} s in topology [{topology}]")]
    NonFinite { time: f64, topology: String },
}
