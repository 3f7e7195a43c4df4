//! What loading a scenario can fail at, each with where in the file and what is
//! allowed; and the design warnings returned alongside a valid scenario.

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
    /// The file is not UTF-8 text.
    #[error(
        "{file}:{line}:{column}: not UTF-8 text: byte 0x{byte:02X} at byte offset {offset} \
         does not start or continue a UTF-8 character; save the file as UTF-8"
    )]
    Encoding {
        /// File name as given.
        file: String,
        /// 1-based line of the byte.
        line: usize,
        /// 1-based column (characters) of the byte.
        column: usize,
        /// 0-based byte offset in the file.
        offset: usize,
        /// The offending byte.
        byte: u8,
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
        /// File name as given, then `:line:column` of the field once located.
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

impl ScenarioError {
    /// The error with the line and column of its field in `text` joined to the file
    /// name, for errors found after parsing (which know the field but not the spot).
    pub(crate) fn located(mut self, text: &str) -> Self {
        let (file, field) = match &mut self {
            ScenarioError::OutOfRange { file, field, .. }
            | ScenarioError::Infeasible { file, field, .. }
            | ScenarioError::UnknownSignal { file, field, .. }
            | ScenarioError::Model { file, field, .. } => (file, field.as_str()),
            _ => return self,
        };
        if let Some((line, column)) = super::locate::locate(text, field) {
            file.push_str(&format!(":{line}:{column}"));
        }
        self
    }
}
