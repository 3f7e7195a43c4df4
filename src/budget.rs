//! What a run will cost, known before it starts: switching periods, waveform rows,
//! output bytes and a wall-time estimate; and the default bounds past which `check`,
//! `run` and `batch` refuse to start unless told `--allow-large`.
//!
//! The estimate is arithmetic, not a trial run. Its constants come from the
//! `long_run` bench on the reference machine (README "Benchmarks": 10⁶ periods of the
//! closed-loop demo with six signals, 17 s, 521 MB) and from the 7 ms load-step example
//! (1050 periods: 5182 switching-instant rows, 4216 topology changes, 1.30 MB).

use serde::Serialize;
use stepflux_engine::{SimOptions, TimeGrid};

use crate::scenario::{design_point, Loaded, ScenarioError};
use crate::writers::hdf5::DEFAULT_CHUNK_LEN;

/// Switching instants saved as waveform rows per period besides the regular samples
/// (clock edge, turn-off, reset end, rectifier and freewheel hand-overs; the load-step
/// example shows 4.9).
const INSTANTS_PER_PERIOD: f64 = 5.0;
/// Topology changes recorded per period (the load-step example shows 4.0).
const CHANGES_PER_PERIOD: f64 = 4.0;
/// Wall seconds per simulated period, stepping and measuring (closed-loop bench).
const SECONDS_PER_PERIOD: f64 = 4e-6;
/// Wall seconds per value written to the waveform file.
const SECONDS_PER_VALUE: f64 = 0.2e-6;
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
    /// Wall seconds, about, on the reference machine.
    pub seconds: f64,
    /// The engine's time step quantum, seconds: no sample interval can be shorter.
    pub time_quantum_s: f64,
}

/// The cost of running `l`.
pub fn estimate(l: &Loaded) -> Cost {
    let job = &l.job;
    let frequency = design_point(job).frequency;
    let a = &job.analysis;
    let periods = a.stop_time * frequency;
    let samples = a.stop_time / a.sample_interval + INSTANTS_PER_PERIOD * periods;
    let signals = match job.save.len() {
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
        seconds: periods * SECONDS_PER_PERIOD + values * SECONDS_PER_VALUE,
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

impl Cost {
    /// The estimate as `check` prints it.
    pub fn text(&self) -> String {
        format!(
            "run cost estimate: {} switching periods, {} samples per signal × {} \
             signals, about {} of waveforms, run time {} on the reference machine",
            crate::eng::prefixed(self.periods),
            crate::eng::prefixed(self.samples_per_signal),
            self.signals,
            bytes(self.output_bytes),
            duration(self.seconds)
        )
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
    fn bytes_and_durations_read_as_people_write_them() {
        assert_eq!(bytes(521e6), "521.00 MB");
        assert_eq!(bytes(12.0), "12.00 B");
        assert_eq!(duration(0.2), "under 1 s");
        assert_eq!(duration(200.0), "3 min 20 s");
        assert_eq!(duration(36_000.0), "10.0 h");
    }
}
