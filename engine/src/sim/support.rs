//! Bookkeeping around the stepping loop: diode settling, meters, samples, source
//! breakpoints and the storm guard's error.

use std::sync::Arc;

use nalgebra::DVector;

use crate::circuit::ElementId;
use crate::error::EngineError;
use crate::event::{Sink, TraceKind};
use crate::ladder::Tick;
use crate::system::{System, TopologyData};
use crate::topology::Topology;

use super::{source_waveform, step, Simulation};

impl Simulation {
    /// Brings the diodes to a consistent state at the present instant (see
    /// [`settle_diodes`]).
    pub(super) fn settle(&mut self) -> Result<(), EngineError> {
        self.generation += 1;
        let time = self.time();
        settle_diodes(
            &mut self.system,
            &mut self.topo,
            &self.z,
            time,
            &mut self.visited,
            &mut self.flipped,
            &mut self.raw,
        )?;
        // The diode rows were just evaluated at this state: only the event signals'
        // rows are missing for the cached event values.
        let nd = self.system.diode_count();
        for r in nd..self.raw.len() {
            self.raw[r] = self.topo.value(r, &self.z);
        }
        let armed = &self.armed[..self.armed_len];
        step::all_events(&self.raw, armed, nd, time, &mut self.g_lo);
        step::all_slopes(
            &self.topo,
            self.z.as_slice(),
            armed,
            nd,
            &mut self.raw_d,
            &mut self.d_lo,
        );
        self.g_lo_at = Some((self.tick, self.generation));
        self.ramp = step::RAMP_START;
        Ok(())
    }

    /// Sends the probes' present values to the sink.
    pub(super) fn emit(&mut self, sink: &mut dyn Sink, at_event: bool) -> Result<(), EngineError> {
        let time = self.time();
        let now = self.topo.topology;
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
        let first = self.system.diode_count() + self.system.observation.event_signals.len();
        let n = self.system.observation.probes.len();
        for k in 0..n {
            self.values[k] = self.topo.value(first + k, &self.z);
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
        self.sources_changed();
        self.pending_flagged = true;
        self.settle()
    }

    /// The sources' values or slopes changed outside a step.
    pub(super) fn sources_changed(&mut self) {
        let l = &self.system.layout;
        let slopes = l.nx() + 1 + l.sources.len();
        self.sources.changed(&self.z.as_slice()[slopes..]);
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
        if crate::kernel::all_finite(self.z.as_slice()) {
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

/// Brings the diodes to a consistent state at time `time` (seconds): while some
/// diode's switching function is positive, flip the most violated one (the first in
/// layout order on a tie). States (inductor currents, capacitor voltages) do not jump,
/// so only the resistive solution changes. A topology seen twice means no consistent
/// state exists. `flipped` receives the diodes flipped, in order, and `g[..nd]` the
/// switching functions in the settled topology. Shared by the exact path and the
/// reference path ([`crate::reference`]) so both follow the same rule.
pub(crate) fn settle_diodes(
    system: &mut System,
    topo: &mut Arc<TopologyData>,
    z: &DVector<f64>,
    time: f64,
    visited: &mut Vec<Topology>,
    flipped: &mut Vec<ElementId>,
    g: &mut [f64],
) -> Result<(), EngineError> {
    visited.clear();
    flipped.clear();
    visited.push(topo.topology);
    let nd = system.diode_count();
    let limit = 4 * nd + 8;
    loop {
        let mut worst: Option<(usize, f64)> = None;
        for (r, gr) in g[..nd].iter_mut().enumerate() {
            *gr = topo.value(r, z);
            if *gr > 0.0 && worst.is_none_or(|(_, w)| *gr > w) {
                worst = Some((r, *gr));
            }
        }
        let Some((r, _)) = worst else { return Ok(()) };
        let bit = system.layout.diode_bits[r];
        let next = topo.topology.with(bit, !topo.topology.is_on(bit));
        flipped.push(system.layout.switchable[bit]);
        if visited.contains(&next) || visited.len() > limit {
            // The greedy rule cycles; a consistent state may still exist among the
            // diodes it kept flipping, so try their combinations before giving up.
            return match search_consistent(system, visited[0], flipped, z)? {
                Some(found) => {
                    *topo = system.topology(found)?;
                    for (r, gr) in g[..nd].iter_mut().enumerate() {
                        *gr = topo.value(r, z);
                    }
                    Ok(())
                }
                None => Err(inconsistent(system, visited, flipped, next, time)),
            };
        }
        visited.push(next);
        *topo = system.topology(next)?;
    }
}

/// Most diodes whose combinations [`search_consistent`] tries (2^10 nodal solves).
const MAX_SEARCHED_DIODES: usize = 10;

/// Tries every on/off combination of the diodes in `flipped` on top of `start`, fewest
/// changes first (then in bit order, so the result is deterministic), and returns the
/// first topology in which no diode wants to change. Only nodal solves are needed, no
/// exponentials; this runs only when the greedy rule has cycled.
fn search_consistent(
    system: &System,
    start: Topology,
    flipped: &[ElementId],
    z: &DVector<f64>,
) -> Result<Option<Topology>, EngineError> {
    let mut bits: Vec<usize> = flipped
        .iter()
        .filter_map(|e| system.layout.bit_of[e.0])
        .collect();
    bits.sort_unstable();
    bits.dedup();
    if bits.len() > MAX_SEARCHED_DIODES {
        return Ok(None);
    }
    let mut masks: Vec<u32> = (1..1u32 << bits.len()).collect();
    masks.sort_by_key(|m| (m.count_ones(), *m));
    for mask in masks {
        let mut t = start;
        for (k, &bit) in bits.iter().enumerate() {
            if mask >> k & 1 == 1 {
                t = t.with(bit, !start.is_on(bit));
            }
        }
        if system.diode_functions(t, z)?.iter().all(|&g| g <= 0.0) {
            return Ok(Some(t));
        }
    }
    Ok(None)
}

fn inconsistent(
    system: &System,
    visited: &[Topology],
    flipped: &[ElementId],
    repeated: Topology,
    time: f64,
) -> EngineError {
    // visited[k] is the topology before flip k: the cycle is the flips from the first
    // visit of the repeated topology on.
    let first = visited.iter().position(|&t| t == repeated).unwrap_or(0);
    let mut elements: Vec<String> = flipped[first.min(flipped.len())..]
        .iter()
        .map(|e| system.circuit.elements[e.0].name.clone())
        .collect();
    elements.sort();
    elements.dedup();
    EngineError::InconsistentDiodes { time, elements }
}
