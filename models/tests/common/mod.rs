//! Shared rig for the open-loop validation of the forward templates: build a design, run
//! it for whole switching periods with the open-loop gate, capture the last periods'
//! samples, and reduce them to steady-state figures (time average, peak-to-peak, level
//! crossings). Every comparison prints its relative error (see it with `--nocapture`)
//! so it can be quoted.
//!
//! Each test binary compiles this module separately and uses only part of it.
#![allow(dead_code)]

use stepflux_engine::{NullSink, SimOptions, Sink};
use stepflux_models::cycles::CycleRecord;
use stepflux_models::gate::OpenLoopGate;
use stepflux_models::run::ConverterRun;
use stepflux_models::template::{Converter, ForwardDesign};

/// Samples kept from a time on, with the probe names to look columns up by.
pub struct Capture {
    /// Samples before this time (seconds) are dropped.
    pub from: f64,
    /// Probe names, in sample order.
    pub names: Vec<String>,
    /// Sample times, seconds.
    pub time: Vec<f64>,
    /// One row of probe values per sample.
    pub rows: Vec<Vec<f64>>,
}

impl Sink for Capture {
    fn sample(&mut self, time: f64, values: &[f64], _at_event: bool) -> Result<(), String> {
        if time >= self.from {
            self.time.push(time);
            self.rows.push(values.to_vec());
        }
        Ok(())
    }
}

impl Capture {
    /// Column of probe `name`; panics with the name if the template has no such probe.
    pub fn column(&self, name: &str) -> usize {
        self.names
            .iter()
            .position(|n| n == name)
            .unwrap_or_else(|| panic!("no probe named {name}"))
    }

    /// (time, value) of probe `name` for samples with t0 ≤ t ≤ t1.
    pub fn series(&self, name: &str, t0: f64, t1: f64) -> Vec<(f64, f64)> {
        let k = self.column(name);
        self.time
            .iter()
            .zip(&self.rows)
            .filter(|(t, _)| **t >= t0 && **t <= t1)
            .map(|(t, r)| (*t, r[k]))
            .collect()
    }

    /// Time average of `f(value)` of probe `name` over [t0, t1] by the trapezoidal
    /// rule on the samples (event samples included, so switching edges are kept).
    pub fn mean_of(&self, name: &str, t0: f64, t1: f64, f: impl Fn(f64) -> f64) -> f64 {
        let s = self.series(name, t0, t1);
        assert!(s.len() > 10, "too few samples of {name} in the window");
        let area: f64 = s
            .windows(2)
            .map(|w| 0.5 * (f(w[0].1) + f(w[1].1)) * (w[1].0 - w[0].0))
            .sum();
        area / (s[s.len() - 1].0 - s[0].0)
    }

    /// Time average of probe `name` over [t0, t1].
    pub fn mean(&self, name: &str, t0: f64, t1: f64) -> f64 {
        self.mean_of(name, t0, t1, |v| v)
    }

    /// Largest minus smallest sample of probe `name` over [t0, t1].
    pub fn peak_to_peak(&self, name: &str, t0: f64, t1: f64) -> f64 {
        let s = self.series(name, t0, t1);
        assert!(s.len() > 10, "too few samples of {name} in the window");
        let hi = s.iter().map(|p| p.1).fold(f64::NEG_INFINITY, f64::max);
        let lo = s.iter().map(|p| p.1).fold(f64::INFINITY, f64::min);
        hi - lo
    }

    /// Largest sample of probe `name` over [t0, t1].
    pub fn max(&self, name: &str, t0: f64, t1: f64) -> f64 {
        self.series(name, t0, t1)
            .iter()
            .map(|p| p.1)
            .fold(f64::NEG_INFINITY, f64::max)
    }

    /// First time after `t0` at which probe `name` falls through `level`, by linear
    /// interpolation between the two samples around the crossing.
    pub fn first_fall_through(&self, name: &str, t0: f64, level: f64) -> Option<f64> {
        let s = self.series(name, t0, f64::INFINITY);
        s.windows(2).find_map(|w| {
            let ((ta, va), (tb, vb)) = (w[0], w[1]);
            (va > level && vb <= level).then(|| ta + (va - level) / (va - vb) * (tb - ta))
        })
    }
}

/// A design under open-loop drive: the built converter, its run and the cycle table.
pub struct Bench {
    /// The built converter.
    pub conv: Converter,
    /// The run.
    pub run: ConverterRun,
    /// The gate.
    pub gate: OpenLoopGate,
    /// Every cycle record so far.
    pub cycles: Vec<CycleRecord>,
}

impl Bench {
    /// Builds `design` and prepares a run with options for the gate's period, sampling
    /// every `sample_interval` seconds if given.
    pub fn new(design: &ForwardDesign, gate: OpenLoopGate, sample_interval: Option<f64>) -> Self {
        let conv = design.build().expect("design builds");
        let mut options = SimOptions::for_period(gate.period());
        options.sample_interval = sample_interval;
        let run = ConverterRun::new(&conv, options, Vec::new()).expect("run starts");
        Bench {
            conv,
            run,
            gate,
            cycles: Vec::new(),
        }
    }

    /// Switching period, seconds.
    pub fn period(&self) -> f64 {
        self.gate.period()
    }

    /// Runs `periods` periods without keeping samples (settling).
    pub fn settle(&mut self, periods: usize) {
        self.gate
            .run(&mut self.run, periods, &mut NullSink, &mut self.cycles)
            .expect("settling run completes");
    }

    /// Runs `periods` periods and returns the samples of the last `keep` of them.
    pub fn capture(&mut self, periods: usize, keep: usize) -> Capture {
        assert!(keep <= periods);
        let t0 = self.run.sim.time();
        let mut cap = Capture {
            from: t0 + (periods - keep) as f64 * self.period(),
            names: self.run.probes().iter().map(|p| p.name.clone()).collect(),
            time: Vec::new(),
            rows: Vec::new(),
        };
        self.gate
            .run(&mut self.run, periods, &mut cap, &mut self.cycles)
            .expect("captured run completes");
        cap
    }

    /// Start of the capture window of the last `keep` periods (the present time is the
    /// end of the last period).
    pub fn window_start(&self, keep: usize) -> f64 {
        self.run.sim.time() - keep as f64 * self.period()
    }

    /// The last `n` cycle records.
    pub fn last_cycles(&self, n: usize) -> &[CycleRecord] {
        &self.cycles[self.cycles.len() - n..]
    }
}

/// Asserts the run has settled: the mean of probe `name` over the first and the second
/// half of [t0, t1] agree to `rel` (a still-decaying transient shows up as a drift).
pub fn assert_settled(cap: &Capture, name: &str, t0: f64, t1: f64, rel: f64) {
    let mid = 0.5 * (t0 + t1);
    let (a, b) = (cap.mean(name, t0, mid), cap.mean(name, mid, t1));
    assert!(
        ((a - b) / b).abs() < rel,
        "{name} not settled: the window's halves average {a} and {b}"
    );
}

/// Relative error of `got` against `expected`.
pub fn rel_err(got: f64, expected: f64) -> f64 {
    (got - expected) / expected
}

/// Prints and asserts |got − expected| ≤ tolerance·|expected|; returns the relative
/// error so the caller can quote it.
pub fn check_rel(label: &str, got: f64, expected: f64, tolerance: f64) -> f64 {
    let e = rel_err(got, expected);
    eprintln!(
        "{label}: got {got:.6e}, expected {expected:.6e}, relative error {:+.2e} \
         ({:+.4}%; tolerance ±{:.2}%)",
        e,
        100.0 * e,
        100.0 * tolerance
    );
    assert!(
        e.abs() <= tolerance,
        "{label}: relative error {:.3}% exceeds ±{:.2}% (got {got}, expected {expected})",
        100.0 * e,
        100.0 * tolerance
    );
    e
}
