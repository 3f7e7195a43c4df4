//! The run summary: measurements with units, verdicts against the scenario's limits,
//! and the streaming tracker that gathers them while the run goes.

use serde::Serialize;
use stepflux_models::cycles::CycleRecord;

use crate::job::{Drive, Job};

/// One measured figure.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Figure {
    /// Name, e.g. `output.mean`.
    pub name: String,
    /// Value in `unit`.
    pub value: f64,
    /// SI unit symbol ("1" for ratios, "%" for percentages).
    pub unit: String,
}

/// A measurement judged against a limit.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Verdict {
    /// Which limit.
    pub limit: String,
    /// The measured value.
    pub value: f64,
    /// The limit.
    pub bound: f64,
    /// `max` (value must not exceed) or `min` (must not fall below).
    pub kind: &'static str,
    /// Whether it holds.
    pub pass: bool,
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
    /// Switching cycles recorded.
    pub cycles: usize,
    /// Measurements.
    pub measurements: Vec<Figure>,
    /// Verdicts against the limits.
    pub verdicts: Vec<Verdict>,
    /// True when every verdict passes and the run finished.
    pub passed: bool,
    /// Why the run stopped early, if it did.
    pub error: Option<String>,
    /// The usual caution.
    pub caution: &'static str,
}

/// Printed in every summary and in the README.
pub const CAUTION: &str = "Simulation results do not replace measurement and testing of real hardware. \
Switch-mode converters hold hazardous voltages and stored energy; isolation, creepage, clearance and \
safety approval follow local codes and licensed practice.";

/// Streaming extremes and window statistics; O(1) memory.
pub struct Tracker {
    out: Option<usize>,
    drain: Option<usize>,
    flux: Option<usize>,
    /// Final window start, seconds.
    window_start: f64,
    set_point: Option<f64>,
    bsat: f64,
    out_max: f64,
    out_min_window: f64,
    out_max_window: f64,
    out_sum_window: f64,
    out_n_window: usize,
    drain_peak: f64,
    flux_peak: f64,
    cycles: usize,
    max_duty: (f64, f64),
    incomplete: usize,
    first_incomplete: Option<(usize, f64)>,
    min_margin: Option<f64>,
}

impl Tracker {
    /// A tracker for `job`, reading the probes by name.
    pub fn new(job: &Job, probes: &[(String, &str)]) -> Self {
        let find = |n: &str| probes.iter().position(|p| p.0 == n);
        Tracker {
            out: find("out.v"),
            drain: find("drain.v"),
            flux: find("core.b"),
            window_start: 0.9 * job.analysis.stop_time,
            set_point: match &job.drive {
                Drive::Controller(c) => Some(c.voltage_loop.set_point()),
                Drive::OpenLoop(_) => None,
            },
            bsat: job.design.transformer.saturation_flux_density,
            out_max: f64::NEG_INFINITY,
            out_min_window: f64::INFINITY,
            out_max_window: f64::NEG_INFINITY,
            out_sum_window: 0.0,
            out_n_window: 0,
            drain_peak: f64::NEG_INFINITY,
            flux_peak: 0.0,
            cycles: 0,
            max_duty: (0.0, 0.0),
            incomplete: 0,
            first_incomplete: None,
            min_margin: None,
        }
    }

    /// One sample.
    pub fn sample(&mut self, time: f64, values: &[f64], _at_event: bool) {
        if let Some(k) = self.out {
            let v = values[k];
            self.out_max = self.out_max.max(v);
            if time >= self.window_start {
                self.out_min_window = self.out_min_window.min(v);
                self.out_max_window = self.out_max_window.max(v);
                self.out_sum_window += v;
                self.out_n_window += 1;
            }
        }
        if let Some(k) = self.drain {
            self.drain_peak = self.drain_peak.max(values[k]);
        }
        if let Some(k) = self.flux {
            self.flux_peak = self.flux_peak.max(values[k].abs());
        }
    }

    /// One cycle record.
    pub fn cycle(&mut self, r: &CycleRecord) {
        self.cycles += 1;
        if r.duty > self.max_duty.0 {
            self.max_duty = (r.duty, r.start);
        }
        if r.reset_incomplete {
            self.incomplete += 1;
            self.first_incomplete.get_or_insert((r.index, r.start));
        }
        if let Some(m) = r.reset_margin() {
            let pct = 100.0 * m / r.period;
            self.min_margin = Some(self.min_margin.map_or(pct, |x: f64| x.min(pct)));
        }
    }

    fn figures(&self) -> Vec<Figure> {
        let mut f = Vec::new();
        let mut push = |name: &str, value: f64, unit: &str| {
            if value.is_finite() {
                f.push(Figure {
                    name: name.into(),
                    value,
                    unit: unit.into(),
                });
            }
        };
        if self.out_n_window > 0 {
            push(
                "output.mean_final",
                self.out_sum_window / self.out_n_window as f64,
                "V",
            );
            push(
                "output.ripple_final",
                self.out_max_window - self.out_min_window,
                "V",
            );
        }
        push("output.max", self.out_max, "V");
        if let Some(sp) = self.set_point {
            push("output.set_point", sp, "V");
            push("startup.overshoot", 100.0 * (self.out_max - sp) / sp, "%");
        }
        push("drain.peak", self.drain_peak, "V");
        push("core.b_peak", self.flux_peak, "T");
        push(
            "core.b_margin",
            100.0 * (1.0 - self.flux_peak / self.bsat),
            "%",
        );
        push("duty.max", self.max_duty.0, "1");
        push("duty.max_at", self.max_duty.1, "s");
        push("reset.incomplete_cycles", self.incomplete as f64, "1");
        if let Some((k, t)) = self.first_incomplete {
            push("reset.first_incomplete_cycle", k as f64, "1");
            push("reset.first_incomplete_at", t, "s");
        }
        if let Some(m) = self.min_margin {
            push("reset.min_margin", m, "%");
        }
        f
    }

    /// The summary of a finished (or stopped) run.
    pub fn summary(&self, job: &Job, simulated: f64, run_time: f64, samples: usize) -> Summary {
        let measurements = self.figures();
        let verdicts = verdicts(job, &measurements, self.incomplete);
        let passed = verdicts.iter().all(|v| v.pass);
        Summary {
            scenario: job.name.clone(),
            tool: format!("stepflux {}", env!("CARGO_PKG_VERSION")),
            run_time_s: run_time,
            simulated_time_s: simulated,
            samples,
            cycles: self.cycles,
            measurements,
            verdicts,
            passed,
            error: None,
            caution: CAUTION,
        }
    }
}

fn verdicts(job: &Job, m: &[Figure], incomplete: usize) -> Vec<Verdict> {
    let get = |n: &str| m.iter().find(|f| f.name == n).map(|f| f.value);
    let l = &job.limits;
    let mut v = Vec::new();
    let mut check = |limit: &str, value: Option<f64>, bound: Option<f64>, kind: &'static str| {
        if let (Some(value), Some(bound)) = (value, bound) {
            let pass = if kind == "max" {
                value <= bound
            } else {
                value >= bound
            };
            v.push(Verdict {
                limit: limit.into(),
                value,
                bound,
                kind,
                pass,
            });
        }
    };
    check(
        "startup_overshoot_percent",
        get("startup.overshoot"),
        l.startup_overshoot_percent,
        "max",
    );
    check("ripple", get("output.ripple_final"), l.ripple, "max");
    check(
        "flux_margin_percent",
        get("core.b_margin"),
        l.flux_margin_percent,
        "min",
    );
    let margin = if incomplete > 0 {
        Some(f64::NEG_INFINITY)
    } else {
        get("reset.min_margin")
    };
    check(
        "reset_margin_percent",
        margin.map(|x| x.max(-100.0)),
        l.reset_margin_percent,
        "min",
    );
    v
}
