//! Bookkeeping around the stepping loop: settling and the cached event values, samples,
//! source breakpoints and the storm guard's error.

use crate::error::EngineError;
use crate::event::{Sink, TraceKind};
use crate::ladder::Tick;

use super::{step, Simulation};

impl Simulation {
    /// Brings the diodes to a consistent state at the present instant (see
    /// [`crate::run::settle_diodes`]) and caches the event values and slopes there.
    pub(super) fn settle(&mut self) -> Result<(), EngineError> {
        self.generation += 1;
        let time = self.time();
        self.run.settle(time, &mut self.raw)?;
        // The diode rows were just evaluated at this state: only the event signals'
        // rows are missing for the cached event values.
        let nd = self.run.system.diode_count();
        for r in nd..self.raw.len() {
            self.raw[r] = self.run.topo.value(r, &self.run.z);
        }
        let armed = &self.armed[..self.armed_len];
        step::all_events(&self.raw, armed, nd, time, &mut self.g_lo);
        step::all_slopes(
            &self.run.topo,
            self.run.z.as_slice(),
            armed,
            nd,
            &mut self.raw_d,
            &mut self.d_lo,
        );
        self.g_lo_at = Some((self.tick, self.generation));
        self.ramp = step::ramp_start(self.run.topo.ladder());
        Ok(())
    }

    /// Sends the probes' present values to the sink.
    pub(super) fn emit(&mut self, sink: &mut dyn Sink, at_event: bool) -> Result<(), EngineError> {
        let time = self.time();
        let now = self.run.topo.topology;
        let listens = sink.listens();
        if at_event && now != self.reported {
            if listens {
                sink.topology_change(time, self.reported, now)
                    .map_err(|message| EngineError::Sink { time, message })?;
            }
            self.reported = now;
        }
        if !listens {
            return if at_event {
                self.trace_here(sink, TraceKind::Event)
            } else {
                Ok(())
            };
        }
        let first = self.run.system.diode_count() + self.run.system.observation.event_signals.len();
        let n = self.run.system.observation.probes.len();
        for k in 0..n {
            self.values[k] = self.run.topo.value(first + k, &self.run.z);
        }
        sink.sample(time, &self.values[..n], at_event)
            .map_err(|message| EngineError::Sink { time, message })?;
        if at_event {
            self.trace_here(sink, TraceKind::Event)?;
        }
        Ok(())
    }

    /// Moves every source whose breakpoint is now onto its next segment.
    pub(super) fn apply_breakpoints(&mut self) -> Result<(), EngineError> {
        let (grid, tick) = (self.run.system.grid, self.tick);
        self.run.apply_breakpoints(|tb| grid.tick(tb) == tick);
        self.refresh_next_break();
        self.sources_changed();
        self.pending_flagged = true;
        self.settle()
    }

    /// The sources' values or slopes changed outside a step.
    pub(super) fn sources_changed(&mut self) {
        let l = &self.run.system.layout;
        let slopes = l.nx() + 1 + l.sources.len();
        self.sources.changed(&self.run.z.as_slice()[slopes..]);
    }

    pub(super) fn refresh_next_break(&mut self) {
        let grid = self.run.system.grid;
        self.next_break = (self.run.breaks.iter())
            .flatten()
            .map(|&tb| grid.tick(tb).max(self.tick + 1))
            .min()
            .unwrap_or(Tick::MAX);
    }

    pub(super) fn check_finite(&self) -> Result<(), EngineError> {
        if crate::kernel::all_finite(self.run.z.as_slice()) {
            Ok(())
        } else {
            Err(EngineError::NonFinite {
                time: self.time(),
                topology: self.run.describe_topology(),
            })
        }
    }

    pub(super) fn storm_error(&self, count: usize) -> EngineError {
        let mut elements: Vec<String> = (self.run.flipped.iter())
            .map(|e| self.run.system.circuit.elements[e.0].name.clone())
            .collect();
        if elements.is_empty() {
            elements.push("(armed events only)".to_string());
        }
        elements.dedup();
        EngineError::EventStorm {
            time: self.time(),
            count,
            window: self.run.system.grid.time(self.storm.window),
            topology: self.run.describe_topology(),
            elements,
        }
    }
}
