//! One case's result file, `cases/<id>.json`: its parameters, measurements, verdicts
//! and error, plus the run time (kept out of the result tables, which must not depend
//! on the clock). Files are written whole to a temporary name and renamed, so a file
//! that exists is complete.

use std::collections::BTreeMap;
use std::path::Path;

use serde::{Deserialize, Serialize};

use crate::summary::{Figure, Summary, Verdict};
use crate::writers::figure_json::{
    deserialize_figures, deserialize_verdicts, serialize_figures, serialize_verdicts,
};

/// How a case ended.
#[derive(Clone, Copy, Debug, Deserialize, Serialize, PartialEq, Eq, PartialOrd, Ord)]
#[serde(rename_all = "snake_case")]
pub enum Status {
    /// Ran, and every limit held.
    Passed,
    /// Ran, and a limit failed.
    Failed,
    /// Could not run or did not finish: invalid scenario, simulation failure, panic.
    Errored,
}

impl Status {
    /// As written in the tables.
    pub fn as_str(self) -> &'static str {
        match self {
            Status::Passed => "passed",
            Status::Failed => "failed",
            Status::Errored => "errored",
        }
    }
}

/// Contents of a case file.
#[derive(Clone, Debug, Deserialize, Serialize, PartialEq)]
pub struct CaseRecord {
    /// Case id.
    pub id: String,
    /// 0-based index in the study.
    pub index: usize,
    /// Scenario name the case ran under.
    pub name: String,
    /// Fingerprint of the case's scenario text; a resumed run reuses the file only if
    /// it matches.
    pub fingerprint: String,
    /// Parameter values, SI units.
    pub parameters: BTreeMap<String, f64>,
    /// Outcome.
    pub status: Status,
    /// Measurements (none when errored).
    #[serde(
        serialize_with = "serialize_figures",
        deserialize_with = "deserialize_figures"
    )]
    pub measurements: Vec<Figure>,
    /// Limit checks.
    #[serde(
        serialize_with = "serialize_verdicts",
        deserialize_with = "deserialize_verdicts"
    )]
    pub verdicts: Vec<Verdict>,
    /// Why it errored.
    pub error: Option<String>,
    /// Wall-clock seconds; excluded from the result tables.
    pub run_time_s: f64,
}

impl CaseRecord {
    /// A record without results yet.
    pub fn new(
        id: &str,
        index: usize,
        name: String,
        fingerprint: String,
        parameters: BTreeMap<String, f64>,
    ) -> Self {
        CaseRecord {
            id: id.to_string(),
            index,
            name,
            fingerprint,
            parameters,
            status: Status::Errored,
            measurements: Vec::new(),
            verdicts: Vec::new(),
            error: None,
            run_time_s: 0.0,
        }
    }

    /// Fills in a finished run.
    pub fn set_summary(&mut self, s: &Summary) {
        // A figure that could not be measured (non-finite) is left out of the tables.
        self.measurements = s
            .measurements
            .iter()
            .filter(|f| f.has_value())
            .cloned()
            .collect();
        self.verdicts.clone_from(&s.verdicts);
        self.error = s.error.clone();
        // `passed` also holds the run's own core-reset check, which has no limit entry.
        self.status = match (&s.error, s.passed) {
            (Some(_), _) => Status::Errored,
            (None, true) => Status::Passed,
            (None, false) => Status::Failed,
        };
    }

    /// Marks the case errored.
    pub fn set_error(&mut self, message: String) {
        self.status = Status::Errored;
        self.error = Some(message);
    }

    /// Reads a case file; `None` if it is missing or unreadable (it will be rerun).
    pub fn read(path: &Path) -> Option<CaseRecord> {
        let text = std::fs::read_to_string(path).ok()?;
        serde_json::from_str(&text).ok()
    }
}

pub use crate::writers::atomic::{write_atomic, write_json};
