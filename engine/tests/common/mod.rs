//! Shared checker for the engine's specification tests: run a circuit, keep every
//! sample in memory (tests only; the engine itself streams), and compare one probe
//! with an analytic function, reporting the worst deviation and where it happened.
//!
//! Each test binary compiles this module separately and uses only part of it.
#![allow(dead_code)]

use stepflux_engine::{
    Circuit, EngineError, Observation, Quantity, Signal, SimOptions, Simulation, Sink, StepOutcome,
};

/// One sample as the engine reported it.
#[derive(Clone, Debug)]
pub struct Sample {
    /// Seconds.
    pub time: f64,
    /// Probe values, in observation order.
    pub values: Vec<f64>,
    /// Taken at a switching instant (after the switching).
    pub at_event: bool,
}

/// A test sink that keeps every sample.
#[derive(Default)]
pub struct Recorder {
    /// Samples in the order they arrived.
    pub samples: Vec<Sample>,
}

impl Sink for Recorder {
    fn sample(&mut self, time: f64, values: &[f64], at_event: bool) -> Result<(), String> {
        self.samples.push(Sample {
            time,
            values: values.to_vec(),
            at_event,
        });
        Ok(())
    }
}

/// A named probe of one quantity.
pub fn probe(name: &str, q: Quantity) -> (String, Signal) {
    (name.to_string(), Signal::of(q))
}

/// Builds the simulation and runs it to `until` seconds, keeping every sample.
pub fn run(
    circuit: Circuit,
    observation: Observation,
    options: SimOptions,
    until: f64,
) -> (Simulation, Vec<Sample>) {
    let mut sim = Simulation::new(circuit, observation, options).expect("circuit is valid");
    let mut rec = Recorder::default();
    sim.advance(until, &mut rec).expect("run completes");
    (sim, rec.samples)
}

/// Steps to `until` with `step_to`, recording every sample and the time of every
/// event the engine reports.
pub fn step_until(
    sim: &mut Simulation,
    until: f64,
    rec: &mut Recorder,
    events: &mut Vec<f64>,
) -> Result<(), EngineError> {
    loop {
        match sim.step_to(until, rec)? {
            StepOutcome::StopTime => return Ok(()),
            StepOutcome::Event { time, .. } => events.push(time),
            StepOutcome::Internal => {}
        }
    }
}

/// Where a probe deviates most from its expected value.
#[derive(Clone, Copy, Debug)]
pub struct Worst {
    /// Largest |got − expected|.
    pub error: f64,
    /// Seconds at which it occurred.
    pub time: f64,
    /// Engine value there.
    pub got: f64,
    /// Expected value there.
    pub expected: f64,
    /// Number of samples compared.
    pub compared: usize,
}

/// Worst absolute deviation of probe `k` from `expected(t)` over all samples.
pub fn worst(samples: &[Sample], k: usize, expected: impl Fn(f64) -> f64) -> Worst {
    let mut w = Worst {
        error: 0.0,
        time: f64::NAN,
        got: f64::NAN,
        expected: f64::NAN,
        compared: 0,
    };
    for s in samples {
        let (got, want) = (s.values[k], expected(s.time));
        let e = (got - want).abs();
        // A NaN anywhere must fail, so it counts as an infinite error.
        let e = if e.is_nan() { f64::INFINITY } else { e };
        if e > w.error || w.compared == 0 {
            w = Worst {
                error: e,
                time: s.time,
                got,
                expected: want,
                compared: w.compared,
            };
        }
        w.compared += 1;
    }
    w
}

/// Asserts probe `k` stays within `tolerance` (absolute) of `expected(t)` and that at
/// least `min_samples` samples were compared, so a run that produced nothing fails.
/// Prints the worst deviation either way (see it with `--nocapture`).
pub fn check(
    label: &str,
    samples: &[Sample],
    k: usize,
    tolerance: f64,
    min_samples: usize,
    expected: impl Fn(f64) -> f64,
) -> Worst {
    let w = worst(samples, k, expected);
    println!(
        "{label}: worst |error| = {:.3e} at t = {:.9e} s (got {:.15e}, expected {:.15e}; \
         tolerance {:.1e}; {} samples)",
        w.error, w.time, w.got, w.expected, tolerance, w.compared
    );
    assert!(
        w.compared >= min_samples,
        "{label}: only {} samples compared, expected at least {min_samples}",
        w.compared
    );
    assert!(
        w.error <= tolerance,
        "{label}: worst |error| {:.3e} > tolerance {:.1e} at t = {:e} s (got {}, expected {})",
        w.error,
        tolerance,
        w.time,
        w.got,
        w.expected
    );
    w
}
