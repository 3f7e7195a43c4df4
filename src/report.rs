//! The run summary: measurements with units, verdicts against the scenario's limits.

use serde::Serialize;
use stepflux_models::measure;

use crate::job::Job;

/// One measured figure.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Figure {
    /// Name, e.g. `startup.overshoot_pct`.
    pub name: String,
    /// Value in `unit` (non-finite values are reported as null).
    pub value: Option<f64>,
    /// SI unit symbol ("1" for ratios, "%" for percentages).
    pub unit: String,
    /// Why `value` is null; absent when there is a value.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub reason: Option<String>,
}

impl From<measure::Figure> for Figure {
    fn from(f: measure::Figure) -> Self {
        Figure {
            name: f.name,
            value: f.value.is_finite().then_some(f.value),
            unit: f.unit.to_string(),
            reason: None,
        }
    }
}

/// A measurement judged against a limit.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Verdict {
    /// Which limit (the scenario's field name).
    pub limit: String,
    /// The measured value (None: not measured, which fails).
    pub value: Option<f64>,
    /// The limit.
    pub bound: f64,
    /// `max` (value must not exceed) or `min` (must not fall below).
    pub kind: &'static str,
    /// Whether it holds.
    pub pass: bool,
    /// Why `value` is null; absent when there is a value.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub reason: Option<String>,
}

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
    pub design: Vec<Figure>,
    /// Measurements.
    pub measurements: Vec<Figure>,
    /// Verdicts against the limits.
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
            if f.value.is_none() && f.reason.is_none() {
                f.reason = Some(reason.clone());
            }
        }
        for v in &mut self.verdicts {
            if v.value.is_none() && v.reason.is_none() {
                v.reason = Some(format!("fails because it was {reason}"));
            }
        }
    }

    /// Value of a measurement by name.
    pub fn get(&self, name: &str) -> Option<f64> {
        self.measurements
            .iter()
            .find(|f| f.name == name)
            .and_then(|f| f.value)
    }
}

/// The verdicts a job's limits ask for, from the measured figures.
pub fn verdicts(job: &Job, m: &[Figure]) -> Vec<Verdict> {
    let get = |n: &str| m.iter().find(|f| f.name == n).and_then(|f| f.value);
    // Worst over every step: figures are named `<label>.<what>`. A reference step is
    // judged like the others, against the set point it moved to.
    let worst = |suffix: &str| -> Option<f64> {
        let values: Vec<f64> = m
            .iter()
            .filter(|f| {
                ["load_step", "line_step", "reference_step"]
                    .iter()
                    .any(|p| f.name.starts_with(p))
                    && f.name.ends_with(suffix)
            })
            .map(|f| f.value.unwrap_or(f64::INFINITY))
            .collect();
        values.into_iter().reduce(f64::max)
    };
    let l = &job.limits;
    let mut v = Vec::new();
    let mut check = |limit: &str, value: Option<f64>, bound: Option<f64>, kind: &'static str| {
        if let Some(bound) = bound {
            let pass = value.is_some_and(|x| {
                if kind == "max" {
                    x <= bound
                } else {
                    x >= bound
                }
            });
            v.push(Verdict {
                limit: limit.into(),
                value,
                bound,
                kind,
                pass,
                reason: None,
            });
        }
    };
    check(
        "startup_overshoot_pct",
        get("startup.overshoot_pct"),
        l.startup_overshoot_pct,
        "max",
    );
    check("startup_t90", get("startup.t90"), l.startup_t90, "max");
    let deviation = worst(".undershoot_pct")
        .into_iter()
        .chain(worst(".overshoot_pct"))
        .reduce(f64::max);
    check("step_deviation_pct", deviation, l.step_deviation_pct, "max");
    check("step_recovery", worst(".recovery"), l.step_recovery, "max");
    check("ripple_pp", get("out.v.ripple_pp"), l.ripple_pp, "max");
    check(
        "reset_margin_pct",
        get("reset_check.worst.reset_margin_pct"),
        l.reset_margin_pct,
        "min",
    );
    check(
        "flux_margin_pct",
        get("reset_check.worst.flux_margin_pct"),
        l.flux_margin_pct,
        "min",
    );
    check(
        "efficiency_pct",
        get("efficiency.stage").map(|e| 100.0 * e),
        l.efficiency_pct,
        "min",
    );
    v
}

/// The paper design figures of a job (closed forms at its operating range), as
/// summary figures.
pub fn design_figures(job: &Job) -> Vec<Figure> {
    let f = stepflux_models::figures::DesignFigures::compute(
        &job.design,
        &crate::scenario::design_point(job),
    );
    let mut out = vec![
        ("turns_ratio.secondary", Some(f.secondary_ratio), "1"),
        ("turns_ratio.reset", f.reset_ratio, "1"),
        ("output_voltage", Some(f.output_voltage), "V"),
        ("load_current", Some(f.load_current), "A"),
        ("duty.nominal", Some(f.nominal_duty), "1"),
        ("duty.low_line_needed", f.low_line_duty_needed, "1"),
        ("duty.reset_limit", f.reset_limit_duty, "1"),
        ("magnetising_peak", Some(f.magnetising_peak), "A"),
        ("flux_peak", Some(f.flux_peak), "T"),
        ("inductor_ripple", Some(f.inductor_ripple), "A"),
        ("output_ripple", Some(f.output_ripple), "V"),
        ("clamp_voltage", f.clamp_voltage, "V"),
        ("drain_stress", Some(f.drain_stress), "V"),
    ];
    out.retain(|(_, v, _)| v.is_some());
    out.into_iter()
        .map(|(name, value, unit)| {
            let value = value.filter(|v| v.is_finite());
            Figure {
                name: format!("design.{name}"),
                value,
                unit: unit.into(),
                reason: value
                    .is_none()
                    .then(|| "its closed form has no finite value for this design".into()),
            }
        })
        .collect()
}
