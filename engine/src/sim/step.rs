//! The stepping loop: plain steps on the step table, and event location by a search
//! one radix digit at a time. Allocates nothing of its own (see the module above).

use std::sync::Arc;

use nalgebra::DVector;

use crate::error::EngineError;
use crate::event::{Direction, Sink, StepOutcome};
use crate::ladder::{Ladder, Tick};
use crate::system::TopologyData;
use crate::topology::Topology;

use super::sources::SourceParts;
use super::spans::Spans;
use super::{Armed, Simulation};

impl Simulation {
    /// One internal step towards tick `stop`: a table step, an event, or the stop time.
    pub(super) fn step(
        &mut self,
        stop: Tick,
        sink: &mut dyn Sink,
    ) -> Result<StepOutcome, EngineError> {
        if self.pending_flagged {
            self.pending_flagged = false;
            self.emit(sink, true)?;
        }
        if self.tick >= stop {
            return Ok(StepOutcome::StopTime);
        }
        self.sensitivity_step_starts();
        // Output samples never end a step: where steps fall depends on the circuit,
        // its drive and the stop time alone (samples inside a step are read off it
        // afterwards, see `trace.rs`).
        let target = stop.min(self.next_break);
        let nd = self.run.system.diode_count();
        if self.g_lo_at != Some((self.tick, self.generation)) {
            let armed = &self.armed[..self.armed_len];
            let (topo, z) = (&*self.run.topo, &self.run.z);
            for (r, v) in self.raw.iter_mut().enumerate() {
                *v = topo.value(r, z);
            }
            all_events(&self.raw, armed, nd, self.time(), &mut self.g_lo);
            all_slopes(
                topo,
                z.as_slice(),
                armed,
                nd,
                &mut self.raw_d,
                &mut self.d_lo,
            );
        }
        self.start_tick = self.tick;
        let topo = Arc::clone(&self.run.topo);
        let (topology, ladder) = (topo.topology, topo.ladder());
        if !ladder.finite {
            return Err(EngineError::NonFinite {
                time: self.time(),
                topology: self.run.describe_topology(),
            });
        }
        let n = nd + self.armed_len;
        let ev = ladder.nx..ladder.u_row();
        let span = target - self.tick;
        let mut len = 0;
        // A recurring span in one product; if an event fires or may hide within it,
        // the span is stepped digit by digit instead so the event is located as usual.
        if span <= 1 << ladder.top && self.meters.is_empty() && Spans::worth_it(ladder, span) {
            if let Some((stacked, id)) = self.spans.get(topology, span, ladder) {
                let z = self.run.z.as_slice();
                let b = self
                    .sources
                    .get(topology, id, ladder, stacked, &z[ladder.nx..]);
                ladder.step(stacked, z, b, &mut self.ext);
                if let Some(s) = self.sens.as_mut() {
                    s.propose(stacked, ladder.rows);
                }
                let armed = &self.armed[..self.armed_len];
                let t_hi = self.run.system.grid.time(self.tick + span);
                all_events(&self.ext[ev.clone()], armed, nd, t_hi, &mut self.g_hi);
                if crossed(&self.g_lo[..n], &self.g_hi[..n]) == 0
                    && self.hidden(&topo, span, n).is_none()
                {
                    len = span;
                    if let Some(s) = self.sens.as_mut() {
                        s.commit();
                    }
                }
            }
        }
        if len == 0 {
            let mut limit = span.min(1 << ladder.top).min(self.ramp);
            loop {
                let (j, d) = ladder.longest_within(limit);
                let entry = ladder.index(j, d);
                len = ladder.ticks(j, d);
                table_step(
                    ladder,
                    topology,
                    entry,
                    &mut self.sources,
                    &self.run.z,
                    &mut self.ext,
                );
                let armed = &self.armed[..self.armed_len];
                let t_hi = self.run.system.grid.time(self.tick + len);
                all_events(&self.ext[ev.clone()], armed, nd, t_hi, &mut self.g_hi);
                let candidates = crossed(&self.g_lo[..n], &self.g_hi[..n]);
                if candidates != 0 {
                    self.start_z.copy_from(&self.run.z);
                    return self.locate(&topo, j, d, candidates, sink);
                }
                match self.hidden(&topo, len, n) {
                    Some(shorter) if len > 1 => limit = shorter.clamp(1, len - 1),
                    _ => break,
                }
            }
            let (j, d) = ladder.longest_within(len);
            let entry = ladder.index(j, d);
            self.meters
                .add(&self.run.topo, entry, self.run.z.as_slice());
            Self::sensitivity_moves(&mut self.sens, ladder.entry(entry), ladder.rows);
            self.ramp = self.ramp.saturating_mul(RAMP_GROWTH);
        }
        // The step is taken: its start is kept for reading inside it, and its end is
        // the state `hidden` just formed for the step's last trial.
        std::mem::swap(&mut self.start_z, &mut self.run.z);
        self.run.z.as_mut_slice().copy_from_slice(&self.peek_z);
        self.sources.stepped();
        std::mem::swap(&mut self.g_lo, &mut self.g_hi);
        std::mem::swap(&mut self.d_lo, &mut self.d_hi);
        self.tick += len;
        self.g_lo_at = Some((self.tick, self.generation));
        self.check_finite()?;
        self.read_stretch(&topo, sink)?;
        self.on_grid_point(sink)?;
        Ok(if self.tick == stop {
            StepOutcome::StopTime
        } else {
            StepOutcome::Internal
        })
    }

    /// Moves the run by table entry (j, d) of the present topology `topo`: meters,
    /// state, sources' part and tick; the step's output (its event rows too, if `rows`
    /// says so) stays in `ext`.
    fn advance_by(&mut self, topo: &Arc<TopologyData>, j: u32, d: u64, rows: Rows) {
        let ladder = topo.ladder();
        let entry = ladder.index(j, d);
        self.meters.add(topo, entry, self.run.z.as_slice());
        Self::sensitivity_moves(&mut self.sens, ladder.entry(entry), ladder.rows);
        let stacked = ladder.entry(entry);
        let z = self.run.z.as_slice();
        let b = (self.sources).get(topo.topology, entry, ladder, stacked, &z[ladder.nx..]);
        match rows {
            Rows::All => ladder.step(stacked, z, b, &mut self.ext),
            Rows::State => ladder.step_state(stacked, z, b, &mut self.ext),
        }
        ladder.state_from(&self.ext, self.run.z.as_mut_slice());
        self.sources.stepped();
        self.tick += ladder.ticks(j, d);
    }

    /// Whether an event function that is ≤ 0 at both ends of the step just computed
    /// (`self.ext`, `len` ticks) may have crossed zero and come back inside it; if so,
    /// a shorter step to try instead. Fills `d_hi` with every function's slope at the
    /// step's end. See [`hidden_crossing`] for the test and why it suffices.
    fn hidden(&mut self, topo: &TopologyData, len: Tick, n: usize) -> Option<Tick> {
        let ladder = topo.ladder();
        ladder.state_from(&self.ext, &mut self.peek_z);
        let nd = self.run.system.diode_count();
        let armed = &self.armed[..self.armed_len];
        all_slopes(
            topo,
            &self.peek_z,
            armed,
            nd,
            &mut self.raw_d,
            &mut self.d_hi,
        );
        let q = self.run.system.grid.quantum;
        let h = len as f64 * q;
        let mut shortest: Option<f64> = None;
        for i in 0..n {
            let (g0, gh) = (self.g_lo[i], self.g_hi[i]);
            if !(g0 <= 0.0 && gh <= 0.0 && g0.is_finite()) {
                continue;
            }
            if let Some(t) = hidden_crossing(g0, self.d_lo[i], gh, self.d_hi[i], h) {
                shortest = Some(shortest.map_or(t, |s: f64| s.min(t)));
            }
        }
        shortest.map(|t| (t / q).floor() as Tick)
    }

    /// An event fired within a step of entry (j0, d0): search down to the first tick at
    /// which some event function has crossed, one digit at a time from digit j0. Each
    /// digit is a binary search over its value with the event rows carried ahead by the
    /// entries (dot products only), then at most one move of the state. The located
    /// tick is within one quantum of the crossing.
    fn locate(
        &mut self,
        topo: &Arc<TopologyData>,
        j0: u32,
        d0: u64,
        candidates: u128,
        sink: &mut dyn Sink,
    ) -> Result<StepOutcome, EngineError> {
        // Only the functions that crossed over the whole step can cross first, so only
        // they are evaluated on the way down; each is ≤ 0 at the bracket's left end.
        let nd = self.run.system.diode_count();
        let ladder = topo.ladder();
        for j in (0..=j0).rev() {
            let (mut lo, mut hi) = (0, if j == j0 { d0 } else { 1 << ladder.bits });
            let armed = &self.armed[..self.armed_len];
            while hi - lo > 1 {
                let mid = (lo + hi) / 2;
                let entry = ladder.index(j, mid);
                let t_mid = self.run.system.grid.time(self.tick + ladder.ticks(j, mid));
                let z = self.run.z.as_slice();
                let rows = |r| ladder.event_ahead(entry, r, z);
                event_values(rows, armed, nd, t_mid, &mut self.g_mid, candidates);
                if positive(&self.g_mid, candidates) != 0 {
                    hi = mid;
                } else {
                    lo = mid;
                }
            }
            if lo > 0 {
                // Crossing beyond lo·R^j: move there (the only product of this digit).
                self.advance_by(topo, j, lo, Rows::State);
            }
        }
        self.advance_by(topo, 0, 1, Rows::All);
        let armed = &self.armed[..self.armed_len];
        let t_hi = self.run.system.grid.time(self.tick);
        let raw = &self.ext[ladder.nx..];
        let rows = |r: usize| raw[r];
        event_values(rows, armed, nd, t_hi, &mut self.g_hi, candidates);
        self.check_finite()?;
        self.read_stretch(topo, sink)?;
        let fired = positive(&self.g_hi, candidates);
        self.sensitivity_event(fired);
        let armed = (fired >> nd) as u64;
        self.run.flipped.clear();
        self.settle()?;
        let diode = self.run.flipped.first().copied();
        self.storm
            .record(self.tick)
            .map_err(|count| self.storm_error(count))?;
        self.on_grid_point(sink)?;
        self.emit(sink, true)?;
        Ok(StepOutcome::Event {
            time: self.time(),
            armed,
            diode,
        })
    }
}

/// First step after a switching instant, ticks, and the factor each following step
/// may grow by. A switching instant excites every mode of the new topology; steps
/// growing geometrically from a few ticks look at the event functions once per
/// factor of 16 in time, so transients on different time scales (a sub-picosecond
/// one on an off-state resistance, a nanosecond one on an output capacitance, the
/// microsecond ones of the power stage) fall in different steps, and the slope test
/// of [`hidden_crossing`] sees each with at most one turn in a step. Costs about
/// five more steps per switching instant.
pub(super) const RAMP_START: Tick = 16;
const RAMP_GROWTH: Tick = 16;

/// The first step after a switching instant into the topology of `ladder`: [`RAMP_START`],
/// or longer where even that is below every time scale of the topology. Steps over
/// which ‖M‖₁·h ≤ 1 see no mode of M past its first time constant, so no transient
/// has turned within them; the fastest topologies of a forward converter (a switch's
/// on-resistance into a small capacitance) already take their first step of
/// [`RAMP_START`] ticks at about that bound, and starting the others there treats every
/// topology alike.
pub(super) fn ramp_start(ladder: &Ladder) -> Tick {
    RAMP_START.max(ladder.quiet)
}

/// Event function values at time `t` into `g`, for the functions whose bit is set in
/// `which`, from `rows(r)`, the value of event row r (diode rows first, then event
/// signals): diode r is bit r, armed slot k is bit nd + k, sign-adjusted so every
/// function fires rising through zero; an empty slot is −∞ so it never fires.
#[inline]
fn event_values(
    rows: impl Fn(usize) -> f64,
    armed: &[Option<Armed>],
    nd: usize,
    t: f64,
    g: &mut [f64],
    which: u128,
) {
    let mut rest = which;
    while rest != 0 {
        let i = rest.trailing_zeros() as usize;
        rest &= rest - 1;
        g[i] = if i < nd {
            rows(i)
        } else {
            match &armed[i - nd] {
                Some(a) => armed_value(a, rows(a.row), t),
                None => f64::NEG_INFINITY,
            }
        };
    }
}

/// Every event function at time `t` into `g` from the raw event-row values (diode rows,
/// then event signals), as [`event_values`] with every bit set.
#[inline]
pub(super) fn all_events(raw: &[f64], armed: &[Option<Armed>], nd: usize, t: f64, g: &mut [f64]) {
    g[..nd].copy_from_slice(&raw[..nd]);
    for (gk, slot) in g[nd..].iter_mut().zip(armed) {
        *gk = match slot {
            Some(a) => armed_value(a, raw[a.row], t),
            None => f64::NEG_INFINITY,
        };
    }
}

/// An armed event's function at time `t` from its signal's value `raw`, signed so it
/// fires rising through zero.
#[inline]
pub(super) fn armed_value(a: &Armed, raw: f64, t: f64) -> f64 {
    let v = raw + a.f.offset + a.f.rate * (t - a.f.t_ref);
    if a.f.direction == Direction::Rising {
        v
    } else {
        -v
    }
}

/// Bits of the functions that went from ≤ 0 in `lo` to > 0 in `hi`.
#[inline]
fn crossed(lo: &[f64], hi: &[f64]) -> u128 {
    // Most steps cross nothing: a plain scan first, the mask only when needed.
    let up = |(&a, &b): (&f64, &f64)| a <= 0.0 && b > 0.0;
    if !lo.iter().zip(hi).any(up) {
        return 0;
    }
    let mut out = 0u128;
    for (i, pair) in lo.iter().zip(hi).enumerate() {
        if up(pair) {
            out |= 1 << i;
        }
    }
    out
}

/// The rows of a step's output a move needs.
#[derive(Clone, Copy)]
enum Rows {
    /// The state and the event rows.
    All,
    /// The state only.
    State,
}

/// One step of table entry `entry` from z into `out` ([`Ladder::step`]), with the
/// sources' part kept in `sources`.
#[inline]
fn table_step(
    ladder: &Ladder,
    topology: Topology,
    entry: usize,
    sources: &mut SourceParts,
    z: &DVector<f64>,
    out: &mut [f64],
) {
    let stacked = ladder.entry(entry);
    let z = z.as_slice();
    let b = sources.get(topology, entry, ladder, stacked, &z[ladder.nx..]);
    ladder.step(stacked, z, b, out);
}

/// Every event function's time derivative at state `z` into `d`, in the order and
/// signs of [`all_events`] (an empty slot gets 0).
/// `raw` receives the slopes of the event rows (diodes, then event signals).
#[inline]
pub(super) fn all_slopes(
    topo: &TopologyData,
    z: &[f64],
    armed: &[Option<Armed>],
    nd: usize,
    raw: &mut [f64],
    d: &mut [f64],
) {
    topo.slopes_into(z, raw);
    d[..nd].copy_from_slice(&raw[..nd]);
    for (dk, slot) in d[nd..].iter_mut().zip(armed) {
        *dk = match slot {
            Some(a) => {
                let v = raw[a.row] + a.f.rate;
                if a.f.direction == Direction::Rising {
                    v
                } else {
                    -v
                }
            }
            None => 0.0,
        };
    }
}

/// The crossing-and-return test for one event function over a step of `h` seconds
/// with g(0) = `g0` ≤ 0, g(h) = `gh` ≤ 0 and slopes `d0`, `dh` at the ends: a time
/// (seconds from the step's start) to shorten the step to when the function may
/// have risen above zero inside, else `None`.
///
/// A function that crosses and returns has a maximum above zero inside the step.
/// - Rising at the start and falling at the end (one maximum inside): where g is
///   concave the two end tangents lie above it, so its maximum is at most their
///   value where they meet, t*. That bound ≤ 0 proves no crossing; otherwise the
///   step is cut at t*, next to the maximum.
/// - Rising at the start and still rising at the end, but the start tangent reaches
///   zero inside (a fast transient that rose, fell back and rises slowly again, as
///   after a diode opens into off-state resistances): cut where the tangent reaches
///   zero. A convex rise never gets here (its tangent lies below it).
/// - Falling at both... or falling only at the end while the end tangent, traced
///   back, lies above zero: halve.
///
/// Each cut is strictly shorter, so a step that keeps being cut ends at one tick,
/// the time resolution, and is then taken. Two maxima inside one step are not
/// excluded by this test; the step cap at 1/8 of the fastest lightly damped
/// oscillation keeps ringing to at most one extremum per step.
fn hidden_crossing(g0: f64, d0: f64, gh: f64, dh: f64, h: f64) -> Option<f64> {
    if d0 > 0.0 && g0 + d0 * h > 0.0 {
        if dh < 0.0 {
            let t = (gh - g0 - dh * h) / (d0 - dh);
            if !(t > 0.0 && t < h) {
                return Some(0.5 * h);
            }
            return (g0 + d0 * t > 0.0).then_some(t);
        }
        return Some(-g0 / d0);
    }
    if dh < 0.0 && d0 <= 0.0 && gh - dh * h > 0.0 {
        return Some(0.5 * h);
    }
    None
}

/// Bits (among `which`) of the functions above zero.
fn positive(g: &[f64], which: u128) -> u128 {
    let mut rest = which;
    let mut out = 0;
    while rest != 0 {
        let i = rest.trailing_zeros() as usize;
        rest &= rest - 1;
        if g[i] > 0.0 {
            out |= 1 << i;
        }
    }
    out
}
