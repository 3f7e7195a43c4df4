//! Reading inside a step once it is taken: output samples on the fixed interval, and
//! the trace of the exact solution (every step end and switching instant, plus each
//! traced probe's extrema inside a step). Trace points carry the traced probes only.
//!
//! Steps end where the circuit, its drive and the stop time say, never at an output
//! sample: a sample inside a step is the state at the step's start carried ahead to the
//! sample's tick by the same cached propagators (a few matrix–vector products), and
//! nothing read off this way feeds back into the run. So the sample interval, the
//! probes written and whether anything is written at all change no switching instant.
//!
//! A probe's slope is one more row over z (`TopologyData::slopes`). Where a traced
//! probe's slope changes sign between a step's ends, its extremum lies inside: the
//! slope's sign is bisected on the propagators down to 1/1024 of the step, then a few
//! regula falsi trials on the slope, which is close to linear over so short a bracket,
//! find its zero to a tick or so. The value there is within ½·|v''|·(a few ticks)² of
//! the true extremum.

use crate::error::EngineError;
use crate::event::{Sink, TraceKind, TracePoint, Turning};
use crate::ladder::{Ladder, Tick};
use crate::system::TopologyData;
use crate::topology::Topology;

use super::probe_rows::ProbeRows;
use super::Simulation;

/// Bisection of an extremum stops at this fraction of the step (as a shift).
const EXTREMUM_BRACKET_SHIFT: u32 = 10;
/// Regula falsi trials on the slope inside that bracket.
const SECANT_TRIALS: usize = 4;

/// What the trace keeps between points. Sized when the simulation is built (or when
/// the traced probes are chosen), so tracing allocates nothing while stepping.
pub(super) struct TraceState {
    /// Whether probe k is traced, and which of its turning points are located.
    traced: Vec<Option<Turning>>,
    /// The traced probes' indices, in order.
    list: Vec<usize>,
    values: Vec<f64>,
    slopes: Vec<f64>,
    /// Slopes at the last point, and where it was: an extremum is looked for only
    /// inside a step that starts at that point, in the same topology.
    prev_slopes: Vec<f64>,
    prev_at: Option<(Tick, Topology)>,
    /// Values and slopes at the end of the step just taken.
    end_values: Vec<f64>,
    end_slopes: Vec<f64>,
    /// Extrema found in the present step: (tick, probe), and the state at each.
    found: Vec<(Tick, usize)>,
    states: Vec<f64>,
    /// The traced probes' rows, gathered per topology.
    rows: ProbeRows,
}

impl TraceState {
    pub(super) fn new(n_probes: usize) -> Self {
        TraceState {
            traced: vec![None; n_probes],
            list: Vec::new(),
            values: vec![0.0; n_probes],
            slopes: vec![f64::NAN; n_probes],
            prev_slopes: vec![f64::NAN; n_probes],
            prev_at: None,
            end_values: vec![f64::NAN; n_probes],
            end_slopes: vec![f64::NAN; n_probes],
            found: Vec::with_capacity(n_probes),
            states: Vec::new(),
            rows: ProbeRows::new(),
        }
    }
}

impl Simulation {
    /// Chooses the probes (indices into the observation's probes) whose slopes and
    /// extrema inside steps the trace reports to sinks that want it
    /// ([`Sink::traces`]). Every probe's value is in every trace point regardless.
    /// A probe named twice gets the union of its turning points.
    pub fn trace_probes(&mut self, probes: &[(usize, Turning)]) -> Result<(), EngineError> {
        let n = self.run.system.observation.probes.len();
        if let Some(&(bad, _)) = probes.iter().find(|&&(k, _)| k >= n) {
            return Err(EngineError::BadOption {
                what: "traced probe index",
                value: bad as f64,
                allowed: "an index into the observation's probes",
            });
        }
        let t = &mut self.trace;
        t.traced.iter_mut().for_each(|b| *b = None);
        for &(k, turning) in probes {
            t.traced[k] = Some(match t.traced[k] {
                Some(had) if had != turning => Turning::Both,
                _ => turning,
            });
        }
        t.list = (0..n).filter(|&k| t.traced[k].is_some()).collect();
        t.values.iter_mut().for_each(|v| *v = f64::NAN);
        t.slopes.iter_mut().for_each(|v| *v = f64::NAN);
        t.states = vec![0.0; n * self.run.z.len()];
        t.rows.reset(t.list.len());
        t.prev_at = None;
        Ok(())
    }

    /// After a step from `start_tick` to the present tick in `topo`: the output
    /// samples strictly inside it, then (for a tracing sink) its extrema and its end.
    pub(super) fn read_stretch(
        &mut self,
        topo: &TopologyData,
        sink: &mut dyn Sink,
    ) -> Result<(), EngineError> {
        self.grid_samples(topo, sink)?;
        if sink.traces() {
            self.trace_stretch(topo, sink)?;
        }
        Ok(())
    }

    fn grid_samples(
        &mut self,
        topo: &TopologyData,
        sink: &mut dyn Sink,
    ) -> Result<(), EngineError> {
        let Some(every) = self.sample_every else {
            return Ok(());
        };
        let skip_to = |next: Tick, past: Tick| {
            if next <= past {
                next + ((past - next) / every + 1) * every
            } else {
                next
            }
        };
        self.next_sample = skip_to(self.next_sample, self.start_tick);
        if !sink.listens() {
            // Keep the schedule; the sample at the present tick stays due.
            if self.tick > 0 {
                self.next_sample = skip_to(self.next_sample, self.tick - 1);
            }
            return Ok(());
        }
        let first = self.first_probe_row();
        let n = self.run.system.observation.probes.len();
        self.peek_from.copy_from_slice(self.start_z.as_slice());
        let mut at = self.start_tick;
        while self.next_sample < self.tick {
            let s = self.next_sample;
            peek(
                topo.ladder(),
                &self.peek_from,
                s - at,
                &mut self.peek_z,
                &mut self.peek_ext,
                &mut self.peek_b,
            );
            self.peek_from.copy_from_slice(&self.peek_z);
            at = s;
            for k in 0..n {
                self.values[k] = topo.value_at(first + k, &self.peek_z);
            }
            let time = self.run.system.grid.time(s);
            sink.sample(time, &self.values[..n], false)
                .map_err(|message| EngineError::Sink { time, message })?;
            self.next_sample += every;
        }
        Ok(())
    }

    /// Extrema of traced probes inside the step just taken, in time order, then the
    /// step's end.
    fn trace_stretch(
        &mut self,
        topo: &TopologyData,
        sink: &mut dyn Sink,
    ) -> Result<(), EngineError> {
        let first = self.first_probe_row();
        self.trace.found.clear();
        // The slopes at the step's end, once: for the extrema search and the end's point.
        let t = &mut self.trace;
        let z = self.run.z.as_slice();
        let (values, slopes) = (&mut t.end_values, &mut t.end_slopes);
        t.rows.read(topo, first, &t.list, z, values, slopes);
        if self.trace.prev_at == Some((self.start_tick, topo.topology)) {
            for j in 0..self.trace.list.len() {
                let k = self.trace.list[j];
                let Some(turning) = self.trace.traced[k] else {
                    continue;
                };
                let s0 = self.trace.prev_slopes[k];
                let s1 = self.trace.end_slopes[k];
                let wanted = match turning {
                    Turning::Maxima => s0 > 0.0 && s1 < 0.0,
                    Turning::Minima => s0 < 0.0 && s1 > 0.0,
                    Turning::Both => (s0 > 0.0 && s1 < 0.0) || (s0 < 0.0 && s1 > 0.0),
                };
                if wanted {
                    self.find_extremum(topo, k, s0, s1);
                }
            }
        }
        let mut found = std::mem::take(&mut self.trace.found);
        found.sort_unstable_by_key(|&(t, k)| (t, k));
        let nz = self.run.z.len();
        for &(tick, k) in &found {
            let state = &self.trace.states[k * nz..(k + 1) * nz];
            self.peek_z.copy_from_slice(state);
            fill_point(topo, first, &self.peek_z, &mut self.trace);
            let point = TracePoint {
                time: self.run.system.grid.time(tick),
                values: &self.trace.values,
                slopes: &self.trace.slopes,
                kind: TraceKind::Extremum(k),
                topology: topo.topology,
            };
            sink.trace(&point).map_err(|message| EngineError::Sink {
                time: point.time,
                message,
            })?;
        }
        self.trace.found = found;
        let t = &mut self.trace;
        for &k in &t.list {
            t.values[k] = t.end_values[k];
            t.slopes[k] = t.end_slopes[k];
        }
        self.send_point(topo, sink, TraceKind::Step)
    }

    /// A trace point at the present state in the present topology (after a switching
    /// instant, gate or source change).
    pub(super) fn trace_here(
        &mut self,
        sink: &mut dyn Sink,
        kind: TraceKind,
    ) -> Result<(), EngineError> {
        if !sink.traces() {
            return Ok(());
        }
        let topo = std::sync::Arc::clone(&self.run.topo);
        self.peek_z.copy_from_slice(self.run.z.as_slice());
        self.trace_point(&topo, sink, kind)
    }

    /// Sends the point at state `peek_z` in `topo` and remembers its slopes.
    fn trace_point(
        &mut self,
        topo: &TopologyData,
        sink: &mut dyn Sink,
        kind: TraceKind,
    ) -> Result<(), EngineError> {
        let first = self.first_probe_row();
        fill_point(topo, first, &self.peek_z, &mut self.trace);
        self.send_point(topo, sink, kind)
    }

    /// Sends the point whose values and slopes `trace` holds, at the present tick in
    /// `topo`, and remembers its slopes.
    fn send_point(
        &mut self,
        topo: &TopologyData,
        sink: &mut dyn Sink,
        kind: TraceKind,
    ) -> Result<(), EngineError> {
        let time = self.time();
        let point = TracePoint {
            time,
            values: &self.trace.values,
            slopes: &self.trace.slopes,
            kind,
            topology: topo.topology,
        };
        sink.trace(&point)
            .map_err(|message| EngineError::Sink { time, message })?;
        let t = &mut self.trace;
        t.prev_slopes.copy_from_slice(&t.slopes);
        t.prev_at = Some((self.tick, topo.topology));
        Ok(())
    }

    /// Locates where probe `k`'s slope, `s0` at the step's start and `s1` at its end,
    /// changes sign; records the tick and the state there in `trace.found`.
    fn find_extremum(&mut self, topo: &TopologyData, k: usize, s0: f64, s1: f64) {
        let ladder = topo.ladder();
        let row = self.first_probe_row() + k;
        let n = self.tick - self.start_tick;
        let width = (n >> EXTREMUM_BRACKET_SHIFT).max(1);
        let (mut lo, mut hi, mut s_lo, mut s_hi) = (0, n, s0, s1);
        self.peek_from.copy_from_slice(self.start_z.as_slice());
        while hi - lo > width {
            let (j, d) = ladder.longest_within(((hi - lo) / 2).max(1));
            let m = ladder.ticks(j, d);
            peek(
                ladder,
                &self.peek_from,
                m,
                &mut self.peek_z,
                &mut self.peek_ext,
                &mut self.peek_b,
            );
            let s = topo.slope(row, &self.peek_z);
            if s * s_lo > 0.0 {
                lo += m;
                s_lo = s;
                self.peek_from.copy_from_slice(&self.peek_z);
            } else {
                hi = lo + m;
                s_hi = s;
                if s == 0.0 {
                    break;
                }
            }
        }
        // Over so short a bracket the slope is close to linear: its zero by regula
        // falsi (Illinois variant, so a bracket end that stays put is not stuck),
        // each trial one product from the bracket's left end.
        let mut at = lo;
        let (mut f_lo, mut f_hi) = (s_lo, s_hi);
        for _ in 0..SECANT_TRIALS {
            if hi - lo <= 1 {
                break;
            }
            let frac = f_lo / (f_lo - f_hi);
            let m = ((hi - lo) as f64 * frac)
                .round()
                .clamp(1.0, (hi - lo - 1) as f64) as Tick;
            let ladder = topo.ladder();
            peek(
                ladder,
                &self.peek_from,
                m,
                &mut self.peek_z,
                &mut self.peek_ext,
                &mut self.peek_b,
            );
            let s = topo.slope(row, &self.peek_z);
            at = lo + m;
            if s * f_lo > 0.0 {
                lo += m;
                f_lo = s;
                f_hi *= 0.5;
                self.peek_from.copy_from_slice(&self.peek_z);
            } else {
                hi = lo + m;
                f_hi = s;
                f_lo *= 0.5;
                if s == 0.0 {
                    break;
                }
            }
        }
        if at == 0 || at >= n {
            return;
        }
        if at == lo {
            self.peek_z.copy_from_slice(&self.peek_from);
        } else {
            peek(
                topo.ladder(),
                &self.peek_from,
                at - lo,
                &mut self.peek_z,
                &mut self.peek_ext,
                &mut self.peek_b,
            );
        }
        let nz = self.run.z.len();
        self.trace.states[k * nz..(k + 1) * nz].copy_from_slice(&self.peek_z);
        self.trace.found.push((self.start_tick + at, k));
    }

    fn first_probe_row(&self) -> usize {
        self.run.system.diode_count() + self.run.system.observation.event_signals.len()
    }
}

/// Each traced probe's value and slope at state `z` in `topo`.
fn fill_point(topo: &TopologyData, first: usize, z: &[f64], t: &mut TraceState) {
    t.rows
        .read(topo, first, &t.list, z, &mut t.values, &mut t.slopes);
}

/// z after `n` more ticks from `from` on `ladder`'s table, into `out` (one product per
/// nonzero digit of n; `ext` and `b` are work space). The sources' part is formed
/// afresh, so nothing kept for the run's own steps is touched.
fn peek(ladder: &Ladder, from: &[f64], n: Tick, out: &mut [f64], ext: &mut [f64], b: &mut [f64]) {
    out.copy_from_slice(from);
    let mut rest = n;
    while rest > 0 {
        let (j, d) = ladder.longest_within(rest);
        let stacked = ladder.entry(ladder.index(j, d));
        ladder.source_part(stacked, &out[ladder.nx..], b);
        ladder.step(stacked, out, b, ext);
        ladder.state_from(ext, out);
        rest -= ladder.ticks(j, d);
    }
}
