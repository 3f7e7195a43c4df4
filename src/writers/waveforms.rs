//! The run's waveform file: samples of the saved probes, the switching-instant flags,
//! the cycle table and the scenario echoed as an attribute — streamed chunk by chunk.
//!
//! Layout of `waveforms.h5` (this project's own):
//! - `time` (s) and one dataset per saved probe, named as the probe (`out.v` …), each
//!   with a `unit` attribute; `at_event` (1 where the sample is a switching instant);
//! - group `cycles`: `start` (s), `duty` (1), `mag_current_start` (A), `reset_end` (s,
//!   NaN when the reset did not finish), `reset_incomplete` (0/1), `drain_peak` (V),
//!   `b_peak` (T), `mag_current_peak` (A);
//! - group `events`: `time` (s), `before` and `after` (topology bit masks; bit k is the
//!   k-th name in the root attribute `topology_bits`, one name per line);
//! - root attributes `scenario` (the scenario text) and `tool_version`.

use std::path::Path;

use anyhow::{Context, Result};
use stepflux_engine::{Sink, Topology};
use stepflux_models::cycles::{CycleRecord, CycleSink};

use super::hdf5::{Hdf5Writer, IntegerId, SignalId, DEFAULT_CHUNK_LEN};

/// Per-cycle columns.
struct CycleColumns {
    start: SignalId,
    duty: SignalId,
    mag_start: SignalId,
    mag_peak: SignalId,
    reset_end: SignalId,
    incomplete: IntegerId,
    drain_peak: SignalId,
    b_peak: SignalId,
}

/// Topology-change columns.
struct EventColumns {
    time: SignalId,
    before: IntegerId,
    after: IntegerId,
}

/// Streams samples and cycle records into `waveforms.h5`.
pub struct WaveformSink {
    events: EventColumns,
    writer: Hdf5Writer,
    time: SignalId,
    at_event: IntegerId,
    /// (probe index, dataset) of every saved probe.
    saved: Vec<(usize, SignalId)>,
    cycles: CycleColumns,
    /// First write failure, reported when the run ends (cycle sinks cannot fail).
    failure: Option<String>,
    samples: usize,
    /// The file, for messages.
    path: String,
}

impl WaveformSink {
    /// Creates the file. `probes` lists every probe (name, unit) in sample order;
    /// `kept` the indices of the signals to keep.
    /// `switchable` names the switches and diodes in topology bit order.
    pub fn create(
        path: &Path,
        probes: &[(String, &str)],
        kept: &[usize],
        switchable: &[String],
        scenario: &str,
    ) -> Result<Self> {
        let mut w = Hdf5Writer::create(path, DEFAULT_CHUNK_LEN)?;
        w.set_text_attribute("scenario", scenario)?;
        w.set_text_attribute("topology_bits", &switchable.join("\n"))?;
        w.add_group("events")?;
        let events = EventColumns {
            time: w.add_signal("events/time", "s")?,
            before: w.add_integers(
                "events/before",
                "topology before the change (bit k: k-th name of topology_bits)",
            )?,
            after: w.add_integers(
                "events/after",
                "topology after the change (bit k: k-th name of topology_bits)",
            )?,
        };
        w.set_text_attribute("tool_version", env!("CARGO_PKG_VERSION"))?;
        let time = w.add_signal("time", "s")?;
        let at_event = w.add_integers(
            "at_event",
            "1 where the sample is taken at a switching instant",
        )?;
        let mut saved = Vec::with_capacity(kept.len());
        for &k in kept {
            let (name, unit) = &probes[k];
            saved.push((k, w.add_signal(name, unit)?));
        }
        w.add_group("cycles")?;
        let cycles = CycleColumns {
            start: w.add_signal("cycles/start", "s")?,
            duty: w.add_signal("cycles/duty", "1")?,
            mag_start: w.add_signal("cycles/mag_current_start", "A")?,
            mag_peak: w.add_signal("cycles/mag_current_peak", "A")?,
            reset_end: w.add_signal("cycles/reset_end", "s")?,
            incomplete: w.add_integers(
                "cycles/reset_incomplete",
                "1 where a reset diode still conducted at the next turn-on",
            )?,
            drain_peak: w.add_signal("cycles/drain_peak", "V")?,
            b_peak: w.add_signal("cycles/b_peak", "T")?,
        };
        Ok(WaveformSink {
            events,
            writer: w,
            time,
            at_event,
            saved,
            cycles,
            failure: None,
            samples: 0,
            path: path.display().to_string(),
        })
    }

    /// Samples written so far.
    pub fn samples(&self) -> usize {
        self.samples
    }

    /// Writes what is staged and flushes the file to disk (see [`Hdf5Writer::checkpoint`]).
    pub fn checkpoint(&mut self) -> Result<()> {
        let path = &self.path;
        self.writer
            .checkpoint()
            .with_context(|| format!("writing {path}"))
    }

    /// Flushes and closes the file; reports any write failure met on the way.
    ///
    /// A file that met a write failure (a full disk, a file-size limit) is removed:
    /// the HDF5 library leaves such a file truncated below its own recorded end, which
    /// no reader opens, and a file that looks whole but is not is worse than none. The
    /// run's summary still holds every figure computed (DEVELOPERS.md "Bounded work
    /// and stopping").
    pub fn finish(self) -> Result<()> {
        let path = self.path;
        let closed = match self.failure {
            Some(f) => {
                drop(self.writer);
                Err(anyhow::anyhow!(f))
            }
            None => self.writer.finish(),
        };
        closed.map_err(|e| {
            let removed = match std::fs::remove_file(&path) {
                Ok(()) => "the incomplete file was removed",
                Err(_) => "the incomplete file could not be removed",
            };
            e.context(format!("writing {path} ({removed})"))
        })
    }

    fn write_cycle(&mut self, r: &CycleRecord) -> Result<()> {
        let c = &self.cycles;
        let w = &mut self.writer;
        w.append(c.start, &[r.start])?;
        w.append(c.duty, &[r.duty])?;
        w.append(c.mag_start, &[r.mag_current_start])?;
        w.append(c.mag_peak, &[r.mag_current_peak])?;
        w.append(c.reset_end, &[r.reset_end.unwrap_or(f64::NAN)])?;
        w.append_integer(c.incomplete, u64::from(r.reset_incomplete))?;
        w.append(c.drain_peak, &[r.drain_peak])?;
        w.append(c.b_peak, &[r.b_peak])
    }
}

impl Sink for WaveformSink {
    fn sample(&mut self, time: f64, values: &[f64], at_event: bool) -> Result<(), String> {
        let mut write = || -> Result<()> {
            self.writer.append(self.time, &[time])?;
            self.writer
                .append_integer(self.at_event, u64::from(at_event))?;
            for &(k, id) in &self.saved {
                self.writer.append(id, &values[k..=k])?;
            }
            Ok(())
        };
        if let Err(e) = write() {
            self.failure.get_or_insert_with(|| format!("{e:#}"));
            return Err(format!("writing {}: {e:#}", self.path));
        }
        self.samples += 1;
        Ok(())
    }

    fn topology_change(
        &mut self,
        time: f64,
        before: Topology,
        after: Topology,
    ) -> Result<(), String> {
        self.write_event(time, before.0, after.0).map_err(|e| {
            self.failure.get_or_insert_with(|| format!("{e:#}"));
            format!("writing {}: {e:#}", self.path)
        })
    }
}

impl WaveformSink {
    fn write_event(&mut self, time: f64, before: u64, after: u64) -> Result<()> {
        self.writer.append(self.events.time, &[time])?;
        self.writer.append_integer(self.events.before, before)?;
        self.writer.append_integer(self.events.after, after)
    }
}

impl CycleSink for WaveformSink {
    fn cycle(&mut self, record: &CycleRecord) {
        if self.failure.is_none() {
            if let Err(e) = self.write_cycle(record) {
                self.failure = Some(format!("{e:#}"));
            }
        }
    }
}
