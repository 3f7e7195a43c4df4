//! Bookkeeping around the stepping loop: diode settling, meters, samples, source
//! breakpoints and the storm guard's error.

use crate::error::EngineError;
use crate::event::Sink;
use crate::ladder::Tick;
use crate::system::TopologyData;

use super::{source_waveform, Simulation};

impl Simulation {
    /// Brings the diodes to a consistent state at the present instant: while some
    /// diode's switching function is positive, flip the most violated one. States
    /// (inductor currents, capacitor voltages) do not jump, so only the resistive
    /// solution changes. A topology seen twice means no consistent state exists.
    pub(super) fn settle(&mut self) -> Result<(), EngineError> {
        self.visited.clear();
        self.visited.push(self.topo.topology);
        let limit = 4 * self.system.diode_count() + 8;
        loop {
            let nd = self.system.diode_count();
            let mut worst: Option<(usize, f64)> = None;
            for r in 0..nd {
                let g = self.topo.rows.row(r).tr_dot(&self.z);
                if g > 0.0 && worst.is_none_or(|(_, w)| g > w) {
                    worst = Some((r, g));
                }
            }
            let Some((r, _)) = worst else { return Ok(()) };
            let bit = self.system.layout.diode_bits[r];
            let next = self.topo.topology.with(bit, !self.topo.topology.is_on(bit));
            self.flipped.push(self.system.layout.switchable[bit]);
            if self.visited.contains(&next) || self.visited.len() > limit {
                return Err(self.inconsistent(next));
            }
            self.visited.push(next);
            self.topo = self.system.topology(next)?;
        }
    }

    fn inconsistent(&self, repeated: crate::topology::Topology) -> EngineError {
        let first = self
            .visited
            .iter()
            .position(|&t| t == repeated)
            .unwrap_or(0);
        let mut elements: Vec<String> = self.flipped[first.min(self.flipped.len())..]
            .iter()
            .map(|e| self.system.circuit.elements[e.0].name.clone())
            .collect();
        elements.sort();
        elements.dedup();
        EngineError::InconsistentDiodes {
            time: self.time(),
            elements,
        }
    }

    /// Adds each meter's exact integral over a step of rung `p` starting at z.
    pub(super) fn accumulate(&mut self, topo: &TopologyData, p: u32) {
        for (acc, w) in self.meters.iter_mut().zip(&topo.ladder.meters) {
            w[p as usize].mul_to(&self.z, &mut self.w_z);
            *acc += self.z.dot(&self.w_z);
        }
    }

    /// Sends the probes' present values to the sink.
    pub(super) fn emit(&mut self, sink: &mut dyn Sink, at_event: bool) -> Result<(), EngineError> {
        let first = self.system.diode_count() + self.system.observation.event_signals.len();
        let n = self.system.observation.probes.len();
        for k in 0..n {
            self.values[k] = self.topo.rows.row(first + k).tr_dot(&self.z);
        }
        let time = self.time();
        sink.sample(time, &self.values[..n], at_event)
            .map_err(|message| EngineError::Sink { time, message })
    }

    /// Moves every source whose breakpoint is now onto its next segment.
    pub(super) fn apply_breakpoints(&mut self) -> Result<(), EngineError> {
        let grid = self.system.grid;
        for k in 0..self.breaks.len() {
            let Some(tb) = self.breaks[k] else { continue };
            if grid.tick(tb) != self.tick {
                continue;
            }
            let src = self.system.layout.sources[k];
            let seg = source_waveform(&self.system.circuit, src).segment(tb);
            let (w, s) = (self.system.layout.w(k), self.system.layout.s(k));
            self.z[w] = seg.value;
            self.z[s] = seg.slope;
            self.breaks[k] = seg.until;
        }
        self.refresh_next_break();
        self.pending_flagged = true;
        self.settle()
    }

    pub(super) fn refresh_next_break(&mut self) {
        let grid = self.system.grid;
        self.next_break = self
            .breaks
            .iter()
            .flatten()
            .map(|&tb| grid.tick(tb).max(self.tick + 1))
            .min()
            .unwrap_or(Tick::MAX);
    }

    pub(super) fn check_finite(&self) -> Result<(), EngineError> {
        if self.z.iter().all(|v| v.is_finite()) {
            Ok(())
        } else {
            Err(EngineError::NonFinite {
                time: self.time(),
                topology: self.describe_topology(),
            })
        }
    }

    fn describe_topology(&self) -> String {
        self.topo
            .topology
            .describe(&self.system.circuit, &self.system.layout)
    }

    pub(super) fn storm_error(&self, count: usize) -> EngineError {
        let mut elements: Vec<String> = self
            .flipped
            .iter()
            .map(|e| self.system.circuit.elements[e.0].name.clone())
            .collect();
        if elements.is_empty() {
            elements.push("(armed events only)".to_string());
        }
        elements.dedup();
        EngineError::EventStorm {
            time: self.time(),
            count,
            window: self.system.grid.time(self.storm.window),
            topology: self.describe_topology(),
            elements,
        }
    }
}
