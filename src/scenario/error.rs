//! What loading a scenario can fail at, each with where in the file and what is
//! allowed; and the design warnings returned alongside a valid scenario.

use std::fmt;
use std::path::PathBuf;

use stepflux_models::ModelError;
use thiserror::Error;

/// A scenario that cannot be run.
#[derive(Debug, Error)]
pub enum ScenarioError {
    /// The file could not be read.
    #[error("cannot read scenario {}", path.display())]
    Read {
        /// The file.
        path: PathBuf,
        /// Why.
        #[source]
        source: std::io::Error,
    },
    /// The text is not well-formed JSON.
    #[error("{file}:{line}:{column}: malformed JSON: {message}")]
    Syntax {
        /// File name as given.
        file: String,
        /// 1-based line.
        line: usize,
        /// 1-based column.
        column: usize,
        /// The parser's message.
        message: String,
    },
    /// Well-formed JSON that does not fit the format: unknown or missing field, wrong
    /// type, wrong unit.
    #[error("{file}:{line}:{column}: {field}: {message}")]
    Field {
        /// File name as given.
        file: String,
        /// 1-based line.
        line: usize,
        /// 1-based column.
        column: usize,
        /// Dotted path of the field.
        field: String,
        /// What is wrong and what is allowed.
        message: String,
    },
    /// A value outside its allowed range.
    #[error("{file}: {field} = {value} is not allowed; expected {allowed}")]
    OutOfRange {
        /// File name as given.
        file: String,
        /// Dotted path of the field.
        field: String,
        /// The value given.
        value: String,
        /// What is allowed.
        allowed: String,
    },
    /// A design that cannot work as specified.
    #[error("{file}: {field}: infeasible: {message}")]
    Infeasible {
        /// File name as given.
        file: String,
        /// Dotted path of the field most to blame.
        field: String,
        /// What fails, with the numbers.
        message: String,
    },
    /// A signal to save that the converter does not have.
    #[error("{file}: {field}: unknown signal \"{name}\"; this converter has: {available}")]
    UnknownSignal {
        /// File name as given.
        file: String,
        /// Path of the entry, e.g. `save[2]`.
        field: String,
        /// The name given.
        name: String,
        /// The names it has, comma-separated.
        available: String,
    },
    /// The models refused the design while building it.
    #[error("{file}: {field}: {error}")]
    Model {
        /// File name as given.
        file: String,
        /// The part of the scenario being built.
        field: String,
        /// The models' error.
        error: ModelError,
    },
}

/// A concern about a valid scenario: it runs, but the designer should look.
#[derive(Clone, Debug, PartialEq)]
pub struct Warning {
    /// Dotted path of the field most to blame.
    pub field: String,
    /// What, with the numbers.
    pub message: String,
}

impl fmt::Display for Warning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}", self.field, self.message)
    }
}

/// Turns a parse failure into [`ScenarioError::Syntax`] or [`ScenarioError::Field`].
pub(super) fn from_json(
    file: &str,
    err: serde_path_to_error::Error<serde_json::Error>,
) -> ScenarioError {
    let path = err.path().to_string();
    let inner = err.into_inner();
    // serde_json counts column 0 before a line's first character (at the end of a
    // file ending in a newline); editors count from 1.
    let (line, column) = (inner.line(), inner.column().max(1));
    let message = strip_position(&inner.to_string(), inner.line(), inner.column());
    match inner.classify() {
        serde_json::error::Category::Data => ScenarioError::Field {
            file: file.to_string(),
            line,
            column,
            field: if path == "." {
                "(top level)".into()
            } else {
                path
            },
            message,
        },
        _ => ScenarioError::Syntax {
            file: file.to_string(),
            line,
            column,
            message,
        },
    }
}

/// serde_json ends its messages with " at line L column C"; the position is reported
/// separately, in the `file:line:column` form editors jump to.
fn strip_position(message: &str, line: usize, column: usize) -> String {
    let tail = format!(" at line {line} column {column}");
    message.strip_suffix(&tail).unwrap_or(message).to_string()
}
