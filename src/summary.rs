//! The run summary: measurements with units, verdicts against the scenario's limits.

use serde::Serialize;

use crate::job::Job;
use crate::writers::figure_json::{serialize_figures, serialize_verdicts};

pub use stepflux_models::job::verdict::Verdict;
pub use stepflux_models::measure::Figure;

/// Where a run stopped on request (SIGINT or SIGTERM).
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Interruption {
    /// Simulated time reached, seconds.
    pub at_s: f64,
    /// What stopped it.
    pub reason: &'static str,
}

impl Interruption {
    /// A stop request honoured at simulated time `at_s`.
    pub fn at(at_s: f64) -> Self {
        Interruption {
            at_s,
            reason: "stopped by SIGINT or SIGTERM; figures cover the run up to at_s",
        }
    }
}

/// Contents of `summary.json`.
#[derive(Clone, Debug, Serialize)]
pub struct Summary {
    /// Scenario name.
    pub scenario: String,
    /// Tool name and version.
    pub tool: String,
    /// Wall-clock seconds the run took.
    pub run_time_s: f64,
    /// Seconds simulated.
    pub simulated_time_s: f64,
    /// Waveform samples written.
    pub samples: usize,
    /// Design figures derived before the run (closed forms).
    #[serde(serialize_with = "serialize_figures")]
    pub design: Vec<Figure>,
    /// Measurements.
    #[serde(serialize_with = "serialize_figures")]
    pub measurements: Vec<Figure>,
    /// Verdicts against the limits.
    #[serde(serialize_with = "serialize_verdicts")]
    pub verdicts: Vec<Verdict>,
    /// True when every verdict passes, the core-reset check passes and the run finished.
    pub passed: bool,
    /// Why the design stopped the run before its stop time, if it did (a core that
    /// ran away past its saturation knee): a design failure, not an error.
    pub stopped: Option<String>,
    /// Why the run stopped early, if it did.
    pub error: Option<String>,
    /// The steady state the run started from (`analysis.start: "steady"`), every
    /// state by name.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub steady_state: Option<crate::steady::SteadyReport>,
    /// Set when a stop request ended the run early; absent for a run that went on to
    /// its stop time or failed.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub interrupted: Option<Interruption>,
    /// The usual caution.
    pub caution: &'static str,
}

/// Printed in every summary and in the README.
pub const CAUTION: &str = "Simulation results do not replace measurement and testing of real hardware. \
Switch-mode converters hold hazardous voltages and stored energy; isolation, creepage, clearance and \
safety approval follow local codes and licensed practice.";

impl Summary {
    /// Gives every null figure and verdict value the reason it is null.
    pub fn explain_missing(&mut self) {
        let reason = match (&self.interrupted, &self.error) {
            (Some(i), _) => format!(
                "not measured: the run was interrupted at {:e} s, before this could be computed",
                i.at_s
            ),
            (None, Some(e)) => format!("not measured: the run stopped early ({e})"),
            (None, None) => "not measured: what it measures did not happen within this run \
                             (a longer stop_time, or a step inside the run, may give it)"
                .to_string(),
        };
        for f in self.measurements.iter_mut().chain(self.design.iter_mut()) {
            if !f.has_value() && f.reason.is_none() {
                f.reason = Some(reason.clone());
            }
        }
        for v in &mut self.verdicts {
            if v.value.is_none() && v.reason.is_none() {
                v.reason = Some(format!("fails because it was {reason}"));
            }
        }
    }

    /// Value of a measurement by key, as a number (flags as 1 or 0).
    pub fn get(&self, key: &str) -> Option<f64> {
        self.figure(key).and_then(Figure::number)
    }

    /// A measurement by key.
    pub fn figure(&self, key: &str) -> Option<&Figure> {
        self.measurements.iter().find(|f| f.key == key)
    }
}

/// The paper design figures of a job (closed forms at its operating range).
pub fn design_figures(job: &Job) -> Vec<Figure> {
    job.design_figures().figures()
}
