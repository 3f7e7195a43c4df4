//! The cycle table: one record per switching period, for the core-reset check.
//!
//! A [`CycleWatch`] is fed the simulation after every engine step of a period and
//! closes a [`CycleRecord`] at the next turn-on. Records go to a [`CycleSink`] so a long
//! run need not keep them.

use stepflux_engine::{ElementId, Stepper, Topology, TracePoint, Turning};

/// What one switching period did to the core and the switch.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CycleRecord {
    /// Cycle number from 0.
    pub index: usize,
    /// Turn-on instant, seconds.
    pub start: f64,
    /// Period, seconds.
    pub period: f64,
    /// On-time over period.
    pub duty: f64,
    /// Magnetising current at turn-on, amperes.
    pub mag_current_start: f64,
    /// Highest magnetising current in the cycle, amperes.
    pub mag_current_peak: f64,
    /// When the reset diodes stopped conducting, seconds; `None` if they still
    /// conducted at the next turn-on or never conducted.
    pub reset_end: Option<f64>,
    /// Whether a reset diode still conducted at the next turn-on.
    pub reset_incomplete: bool,
    /// Drain voltage just after turn-on, volts: the output capacitance's voltage when the
    /// switch has one (it cannot jump), else the on-state drop.
    pub drain_start: f64,
    /// Highest drain voltage, volts.
    pub drain_peak: f64,
    /// Highest |B|, tesla.
    pub b_peak: f64,
}

impl CycleRecord {
    /// Time from reset end to the next turn-on, seconds (negative margin is reported as
    /// `None` with `reset_incomplete`).
    pub fn reset_margin(&self) -> Option<f64> {
        self.reset_end.map(|t| self.start + self.period - t)
    }
}

/// Receives closed cycle records.
pub trait CycleSink {
    /// One record.
    fn cycle(&mut self, record: &CycleRecord);
}

impl CycleSink for Vec<CycleRecord> {
    fn cycle(&mut self, record: &CycleRecord) {
        self.push(*record);
    }
}

/// Probe positions and elements the watch reads.
#[derive(Clone, Debug)]
pub struct WatchPoints {
    /// Probe index of the magnetising current.
    pub mag_current: usize,
    /// Probe index of the drain voltage.
    pub drain: usize,
    /// Probe index of the flux density.
    pub flux: usize,
    /// Topology bits of the reset diodes.
    pub reset_bits: Vec<usize>,
}

impl WatchPoints {
    /// Bits of the given reset diodes in the simulation's topology.
    pub fn new<S: Stepper>(
        sim: &S,
        mag_current: usize,
        drain: usize,
        flux: usize,
        reset: &[ElementId],
    ) -> Self {
        let layout = sim.system().layout();
        let reset_bits = reset
            .iter()
            .filter_map(|e| layout.bit_of[e.index()])
            .collect();
        WatchPoints {
            mag_current,
            drain,
            flux,
            reset_bits,
        }
    }

    fn resetting(&self, t: Topology) -> bool {
        self.reset_bits.iter().any(|&b| t.is_on(b))
    }
}

/// Builds cycle records from what it is shown.
#[derive(Clone, Debug)]
pub struct CycleWatch {
    points: WatchPoints,
    open: Option<CycleRecord>,
    was_resetting: bool,
    next_index: usize,
}

impl CycleWatch {
    /// A watch with no cycle open.
    pub fn new(points: WatchPoints) -> Self {
        CycleWatch {
            points,
            open: None,
            was_resetting: false,
            next_index: 0,
        }
    }

    /// Closes the previous cycle (if any) and opens one at a turn-on.
    pub fn turn_on<S: Stepper>(
        &mut self,
        sim: &S,
        period: f64,
        duty: f64,
        sink: &mut dyn CycleSink,
    ) {
        self.close(sim, sink);
        let i = sim.probe(self.points.mag_current);
        self.open = Some(CycleRecord {
            index: self.next_index,
            start: sim.time(),
            period,
            duty,
            mag_current_start: i,
            mag_current_peak: i,
            reset_end: None,
            reset_incomplete: false,
            drain_start: sim.probe(self.points.drain),
            drain_peak: sim.probe(self.points.drain),
            b_peak: sim.probe(self.points.flux).abs(),
        });
        self.next_index += 1;
        self.was_resetting = self.points.resetting(sim.topology());
    }

    /// Records the open cycle's actual duty (known at turn-off).
    pub fn set_duty(&mut self, duty: f64) {
        if let Some(rec) = self.open.as_mut() {
            rec.duty = duty;
        }
    }

    /// Updates extremes and the reset state after an engine step.
    pub fn observe<S: Stepper>(&mut self, sim: &S) {
        let Some(rec) = self.open.as_mut() else {
            return;
        };
        rec.mag_current_peak = rec.mag_current_peak.max(sim.probe(self.points.mag_current));
        rec.drain_peak = rec.drain_peak.max(sim.probe(self.points.drain));
        rec.b_peak = rec.b_peak.max(sim.probe(self.points.flux).abs());
        let resetting = self.points.resetting(sim.topology());
        if self.was_resetting && !resetting {
            rec.reset_end = Some(sim.time());
        }
        if resetting {
            rec.reset_end = None;
        }
        self.was_resetting = resetting;
    }

    /// Updates extremes and the reset state from a point of the exact solution: step
    /// ends, switching instants and the probes' extrema inside steps, so the peaks
    /// are the solution's own, whatever the output sample interval.
    pub fn trace(&mut self, point: &TracePoint<'_>) {
        let Some(rec) = self.open.as_mut() else {
            return;
        };
        let p = &self.points;
        let v = point.values;
        rec.mag_current_peak = rec.mag_current_peak.max(v[p.mag_current]);
        rec.drain_peak = rec.drain_peak.max(v[p.drain]);
        rec.b_peak = rec.b_peak.max(v[p.flux].abs());
        let resetting = p.resetting(point.topology);
        if self.was_resetting && !resetting {
            rec.reset_end = Some(point.time);
        }
        if resetting {
            rec.reset_end = None;
        }
        self.was_resetting = resetting;
    }

    /// The probes the watch reads and the turning points it wants, for the run to
    /// trace: peaks of the magnetising current and drain voltage, |B| both ways.
    pub fn probes(&self) -> [(usize, Turning); 3] {
        let p = &self.points;
        [
            (p.mag_current, Turning::Maxima),
            (p.drain, Turning::Maxima),
            (p.flux, Turning::Both),
        ]
    }

    /// Closes the open cycle at the present instant (the next turn-on or the run's end).
    pub fn close<S: Stepper>(&mut self, _sim: &S, sink: &mut dyn CycleSink) {
        if let Some(mut rec) = self.open.take() {
            // The state last observed, not the present one: at a turn-on the gate has
            // already switched and the diodes have settled, which ends any reset.
            rec.reset_incomplete = self.was_resetting;
            sink.cycle(&rec);
        }
    }
}

/// First cycle from which the magnetising current at turn-on keeps growing: it rises
/// in each of the `run` following cycles and ends above `threshold` amperes. A core
/// that resets returns to the same turn-on current every cycle; one that does not
/// "walks" its flux up cycle by cycle (common practice).
pub fn flux_walk(records: &[CycleRecord], run: usize, threshold: f64) -> Option<usize> {
    if records.len() <= run {
        return None;
    }
    (0..records.len() - run).find(|&k| {
        let w = &records[k..=k + run];
        w.windows(2)
            .all(|p| p[1].mag_current_start > p[0].mag_current_start)
            && w[run].mag_current_start > threshold
    })
}
