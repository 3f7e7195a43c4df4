//! What a run will cost, known before it starts: switching periods, waveform rows,
//! output bytes and a wall-time estimate; and the default bounds past which `check`,
//! `run` and `batch` refuse to start unless told `--allow-large`.
//!
//! Periods, rows and bytes are arithmetic, deterministic, and go into `check --json`.
//! Their constants come from the `long_run` bench (README "Benchmarks": 10⁶ periods of
//! the closed-loop demo with six signals, 17 s, 521 MB) and from the 7 ms load-step
//! example (1050 periods: 5182 switching-instant rows, 4216 topology changes, 1.30 MB).
//! The wall time is measured instead ([`calibrate`]): a short trial of the scenario
//! itself on this machine, scaled to the whole run. It depends on the machine and its
//! load, so it is printed for a person only and never enters a file, figure or verdict.

use std::time::Instant;

use serde::Serialize;
use stepflux_engine::{SimOptions, TimeGrid};

use crate::eng::eng;
use crate::job::{Job, Start};
use crate::pipeline::{run_job_with, RunSettings};
use crate::scenario::{Loaded, ScenarioError};
use crate::writers::hdf5::DEFAULT_CHUNK_LEN;

/// Switching instants saved as waveform rows per period besides the regular samples
/// (clock edge, turn-off, reset end, rectifier and freewheel hand-overs; the load-step
/// example shows 4.9).
const INSTANTS_PER_PERIOD: f64 = 5.0;
/// Topology changes recorded per period (the load-step example shows 4.0).
const CHANGES_PER_PERIOD: f64 = 4.0;
/// Wall seconds per value written to the waveform file (the `long_run` bench less the
/// same run without waveforms); the calibration trial writes nothing.
const SECONDS_PER_VALUE: f64 = 0.2e-6;
/// Switching periods of the first calibration trial; each next one is four times longer.
const TRIAL_FIRST_PERIODS: f64 = 32.0;
/// Stepping time a trial should reach, wall seconds, for the clock's resolution and
/// one slice's jitter to be small beside it.
const TRIAL_TARGET_S: f64 = 0.05;
/// Wall seconds the trials may take together: `check` stays quick. Two trials at
/// least (see [`calibrate`]); on a loaded machine the first alone takes 0.2 s, most of
/// it the one-off building of the converter.
const CALIBRATION_BUDGET_S: f64 = 0.5;
/// Bytes per stored value (f64 or u64).
const VALUE_BYTES: f64 = 8.0;
/// Columns of the cycle table and of the topology-change table.
const CYCLE_COLUMNS: f64 = 8.0;
const EVENT_COLUMNS: f64 = 3.0;

/// Most switching periods one run may simulate by default: about seven minutes at
/// the bench's per-period cost, thirty at its per-period-with-output cost.
pub const MAX_PERIODS: f64 = 1e8;
/// Most bytes one run may write by default.
pub const MAX_OUTPUT_BYTES: f64 = 10e9;

/// A run's estimated cost.
#[derive(Clone, Copy, Debug, Serialize, PartialEq)]
pub struct Cost {
    /// Switching periods simulated.
    pub periods: f64,
    /// Waveform rows (regular samples plus switching instants) per saved signal.
    pub samples_per_signal: f64,
    /// Signals saved.
    pub signals: usize,
    /// Bytes of the waveform file, about.
    pub output_bytes: f64,
    /// Values written to the waveform file (rows times columns, all tables).
    #[serde(skip)]
    pub values: f64,
    /// The engine's time step quantum, seconds: no sample interval can be shorter.
    pub time_quantum_s: f64,
}

/// The cost of running `l`.
pub fn estimate(l: &Loaded) -> Cost {
    let job = &l.job;
    let frequency = job.design_point().frequency;
    let a = &job.analysis;
    let periods = a.stop_time * frequency;
    let samples = a.stop_time / a.sample_interval + INSTANTS_PER_PERIOD * periods;
    let signals = match job.signals.len() {
        0 => l.probes.len(),
        n => n,
    };
    // Rows hold time, the at-event flag and each signal.
    let columns = [
        (samples, 2.0 + signals as f64),
        (periods, CYCLE_COLUMNS),
        (CHANGES_PER_PERIOD * periods, EVENT_COLUMNS),
    ];
    let values: f64 = columns.iter().map(|(n, k)| n * k).sum();
    // The file holds whole chunks: what dominates a short run's size.
    let chunk = DEFAULT_CHUNK_LEN as f64;
    let stored: f64 = columns
        .iter()
        .map(|(n, k)| (n / chunk).ceil().max(1.0) * chunk * k)
        .sum();
    Cost {
        periods,
        samples_per_signal: samples,
        signals,
        output_bytes: stored * VALUE_BYTES,
        values,
        time_quantum_s: quantum(1.0 / frequency),
    }
}

/// The engine's tick for a switching period, as the run will build its grid.
fn quantum(period: f64) -> f64 {
    let o = SimOptions::for_period(period);
    TimeGrid::new(o.max_step, o.event_resolution).map_or(f64::NAN, |g| g.quantum)
}

/// The estimate of `l`, or why it is past the default bounds (unless `allow_large`).
pub fn enforce(l: &Loaded, allow_large: bool) -> Result<Cost, ScenarioError> {
    let cost = estimate(l);
    let a = &l.job.analysis;
    let over = |field: &str, value: String, bound: String| {
        ScenarioError::OutOfRange {
            file: l.file.clone(),
            field: field.to_string(),
            value,
            allowed: format!("{bound}, or pass --allow-large to run it anyway"),
        }
        .located(&l.job.source_text)
    };
    if allow_large {
        return Ok(cost);
    }
    // A NaN quantum (a grid the engine would refuse) is refused here too.
    let on_grid = a.sample_interval >= cost.time_quantum_s;
    if !on_grid {
        return Err(over(
            "analysis.sample_interval",
            format!("{} s", a.sample_interval),
            format!(
                "at least the engine's time step quantum {:e} s for this switching frequency",
                cost.time_quantum_s
            ),
        ));
    }
    if cost.periods > MAX_PERIODS {
        return Err(over(
            "analysis.stop_time",
            format!("{} s ({:.3e} switching periods)", a.stop_time, cost.periods),
            format!("at most {MAX_PERIODS:e} periods per run"),
        ));
    }
    if cost.output_bytes > MAX_OUTPUT_BYTES {
        return Err(over(
            "analysis.sample_interval",
            format!(
                "{} s ({:.3e} samples per signal, {} of waveforms)",
                a.sample_interval,
                cost.samples_per_signal,
                bytes(cost.output_bytes)
            ),
            format!("at most {} of waveforms per run", bytes(MAX_OUTPUT_BYTES)),
        ));
    }
    Ok(cost)
}

/// Bytes with a decimal prefix, e.g. "1.20 GB".
pub fn bytes(n: f64) -> String {
    let (scale, unit) = [(1e12, "TB"), (1e9, "GB"), (1e6, "MB"), (1e3, "kB")]
        .into_iter()
        .find(|(s, _)| n >= *s)
        .unwrap_or((1.0, "B"));
    format!("{:.2} {unit}", n / scale)
}

/// Seconds as a person reads a duration, e.g. "3 min 20 s".
pub fn duration(s: f64) -> String {
    match s {
        s if s < 1.0 => "under 1 s".into(),
        s if s < 120.0 => format!("{s:.0} s"),
        s if s < 7200.0 => format!("{:.0} min {:.0} s", (s / 60.0).floor(), s % 60.0),
        s => format!("{:.1} h", s / 3600.0),
    }
}

/// A duration for a person: engineering units below a second ("120 ms"), else
/// [`duration`].
fn wall(s: f64) -> String {
    match s < 1.0 {
        true => eng(s, "s"),
        false => duration(s),
    }
}

/// What short trials of the scenario on this machine measured.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Calibration {
    /// Switching periods of the longest trial.
    pub periods: f64,
    /// Wall seconds per further simulated period, stepping and measuring.
    pub seconds_per_period: f64,
    /// Wall seconds paid once per run: building the converter, the topologies of the
    /// start-up met for the first time, the figures at the end.
    pub setup_s: f64,
}

impl Calibration {
    /// Wall seconds the whole run of `cost` should take here, writing included.
    pub fn run_seconds(&self, cost: &Cost) -> f64 {
        self.setup_s + cost.periods * self.seconds_per_period + cost.values * SECONDS_PER_VALUE
    }
}

/// Times short runs of `l` itself (no files written), each four times longer than the
/// last. A trial repeats the previous one's periods exactly (same start, same
/// circuit), so the difference of their wall times is the cost of the periods added,
/// free of the one-off costs that dominate a short run. It stops once that difference
/// reaches [`TRIAL_TARGET_S`], the trial reaches the run's own length, or the next
/// would pass [`CALIBRATION_BUDGET_S`]. A steady-state start is tried from a cold
/// start: the shooting is a one-off cost the estimate leaves out.
pub fn calibrate(l: &Loaded) -> Result<Calibration, String> {
    let frequency = l.job.design_point().frequency;
    let total = l.job.analysis.stop_time * frequency;
    let mut job = l.job.clone();
    if job.analysis.start == Start::Steady {
        job.analysis.start = Start::Zero;
    }
    let started = Instant::now();
    let mut previous: Option<(f64, f64)> = None;
    let mut periods = TRIAL_FIRST_PERIODS.min(total);
    loop {
        let wall = trial(&mut job, periods / frequency)?;
        let (added, extra) = match previous {
            Some((n, t)) if wall > t => (periods - n, wall - t),
            // One trial only, or noise larger than the periods added: the plain
            // average, which counts the one-off costs in (an overestimate).
            _ => (periods, wall),
        };
        let spent = started.elapsed().as_secs_f64();
        // The next trial repeats this one and adds three times its periods.
        let next = wall + 3.0 * periods * extra / added;
        // After the first trial only its own length counts: its one-off costs would
        // make any prediction from it too long.
        let over = match previous {
            None => wall > 0.5 * CALIBRATION_BUDGET_S,
            Some(_) => spent + next > CALIBRATION_BUDGET_S,
        };
        let last = periods >= total || over;
        if (previous.is_some() && extra >= TRIAL_TARGET_S) || last {
            let rate = extra / added;
            return match rate.is_finite() && rate > 0.0 {
                true => Ok(Calibration {
                    periods,
                    seconds_per_period: rate,
                    setup_s: (wall - rate * periods).max(0.0),
                }),
                false => Err("the trial was too short to time".into()),
            };
        }
        previous = Some((periods, wall));
        periods = (periods * 4.0).min(total);
    }
}

/// Wall seconds of one run of `job` to `stop` seconds, writing nothing.
fn trial(job: &mut Job, stop: f64) -> Result<f64, String> {
    job.analysis.stop_time = stop;
    let settings = RunSettings {
        waveforms: false,
        stop: None,
    };
    let started = Instant::now();
    run_job_with(job, std::path::Path::new(""), &|_| {}, settings)
        .map_err(|e| crate::text::one_line(&e))?;
    Ok(started.elapsed().as_secs_f64())
}

impl Cost {
    /// The estimate as `check` prints it: the deterministic counts, then the wall time
    /// from `calibration` (or why there is none).
    pub fn text(&self, calibration: &Result<Calibration, String>) -> String {
        let counts = format!(
            "run cost estimate: {} switching periods, {} samples per signal × {} \
             signals, about {} of waveforms",
            crate::eng::prefixed(self.periods),
            crate::eng::prefixed(self.samples_per_signal),
            self.signals,
            bytes(self.output_bytes),
        );
        let time = match calibration {
            Ok(c) => format!(
                "run time estimate: about {} on this machine now (trials of up to {:.0} \
                 periods: {} per period, plus {} of set-up and figures; waveform writing \
                 added at {} per value); a guide from a trial, not a result",
                wall(c.run_seconds(self)),
                c.periods,
                eng(c.seconds_per_period, "s"),
                eng(c.setup_s, "s"),
                eng(SECONDS_PER_VALUE, "s"),
            ),
            Err(why) => format!("run time estimate: none ({why})"),
        };
        format!("{counts}\n{time}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The load-step example with `stop` and `sample` in place of its own.
    fn load_step(stop: &str, sample: &str) -> Loaded {
        let mut v: serde_json::Value =
            serde_json::from_str(include_str!("../scenarios/demo-load-step.json")).unwrap();
        v["analysis"]["stop_time"] = serde_json::json!(stop);
        v["analysis"]["sample_interval"] = serde_json::json!(sample);
        crate::scenario::load_str(&v.to_string(), "load-step.json").unwrap()
    }

    #[test]
    fn the_size_estimate_matches_measured_files() {
        // Measured: README "Benchmarks", long run (10⁶ periods, 10 µs, six signals):
        // 521 MB; the 7 ms example at 1 µs: 1.30 MB (HDF5 overhead included). 25 %:
        // the instants per period move with the operating point.
        for (stop, sample, measured) in [("6.6667 s", "10 us", 521e6), ("7 ms", "1 us", 1.30e6)] {
            let c = estimate(&load_step(stop, sample));
            let ratio = c.output_bytes / measured;
            assert!(
                (0.75..1.25).contains(&ratio),
                "{stop}: {} vs {measured}",
                c.output_bytes
            );
        }
    }

    #[test]
    fn the_default_bounds_refuse_and_allow_large_accepts() {
        // 1000 s at 150 kHz: 1.5e8 periods, past 1e8.
        let l = load_step("1000 s", "1 ms");
        assert!(enforce(&l, false).is_err());
        assert!(enforce(&l, true).is_ok());
        assert!(enforce(&load_step("7 ms", "1 us"), false).is_ok());
    }

    #[test]
    fn a_calibration_times_a_trial_of_the_scenario_itself() {
        // Machine-dependent, so only what holds on any machine: positive finite
        // times, at least the first trial's periods timed, an estimate growing with
        // the run's length.
        let l = load_step("7 ms", "1 us");
        let c = calibrate(&l).expect("the example runs");
        assert!(c.periods > 0.0 && c.periods <= 7e-3 * 150e3 + 1.0, "{c:?}");
        assert!(c.seconds_per_period.is_finite() && c.seconds_per_period > 0.0);
        let (short, long) = (estimate(&l), estimate(&load_step("70 ms", "1 us")));
        assert!(c.run_seconds(&long) > c.run_seconds(&short));
    }

    #[test]
    fn bytes_and_durations_read_as_people_write_them() {
        assert_eq!(bytes(521e6), "521.00 MB");
        assert_eq!(bytes(12.0), "12.00 B");
        assert_eq!(duration(0.2), "under 1 s");
        assert_eq!(duration(200.0), "3 min 20 s");
        assert_eq!(duration(36_000.0), "10.0 h");
    }
}
