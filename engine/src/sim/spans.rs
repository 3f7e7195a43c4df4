//! Propagators of recurring spans. A driver that steps to the same offsets every
//! period (a gate delay after each clock edge, a blanking time) asks for the same
//! multi-digit step over and over; once such a span has recurred in one topology its
//! table entries are multiplied into one propagator, and from then on the span costs one
//! product instead of one per digit. The slots are allocated with the simulation, so
//! building one allocates nothing.

use nalgebra::DMatrix;

use crate::kernel;
use crate::ladder::{Ladder, Tick};
use crate::topology::Topology;

/// Composite propagators kept at once.
const SLOTS: usize = 8;
/// Spans whose recurrences are counted at once.
const TALLY: usize = 32;
/// Recurrences of a span in one topology before its propagator is built: building
/// costs about as much as nz steps, so a span must be seen a few times to pay back.
const RECUR: u32 = 4;

/// One composite propagator for `ticks` in `topology`, laid out as a table entry.
struct Slot {
    topology: Topology,
    ticks: Tick,
    used: u64,
    /// Distinct for every build, so parts kept for an earlier occupant never match.
    id: usize,
    stacked: DMatrix<f64>,
}

/// The composite propagators and the tally of spans not yet built.
pub(super) struct Spans {
    slots: Vec<Slot>,
    /// (topology, ticks, recurrences, last seen) of spans not yet built.
    tally: [(Topology, Tick, u32, u64); TALLY],
    clock: u64,
    builds: usize,
    /// Work space: the product of the lower digits' Φ so far, its next value and one
    /// digit's Φ (nz × nz each).
    partial: DMatrix<f64>,
    next: DMatrix<f64>,
    phi: DMatrix<f64>,
}

impl Spans {
    /// Room for `SLOTS` composites of `rows` × `nz`.
    pub(super) fn new(rows: usize, nz: usize) -> Self {
        let slot = || Slot {
            topology: Topology(u64::MAX),
            ticks: 0,
            used: 0,
            id: 0,
            stacked: DMatrix::zeros(rows, nz),
        };
        Spans {
            slots: (0..SLOTS).map(|_| slot()).collect(),
            tally: [(Topology(u64::MAX), 0, 0, 0); TALLY],
            clock: 0,
            builds: 0,
            partial: DMatrix::zeros(nz, nz),
            next: DMatrix::zeros(nz, nz),
            phi: DMatrix::zeros(nz, nz),
        }
    }

    /// Whether a span of `ticks` has more than one nonzero digit (a single digit is a
    /// table entry already).
    pub(super) fn worth_it(ladder: &Ladder, ticks: Tick) -> bool {
        let (j, d) = ladder.longest_within(ticks);
        ladder.ticks(j, d) != ticks
    }

    /// The composite of `ticks` in `topology` and its id, if built; otherwise counts
    /// the span and builds it once it has recurred often enough. Ids are above every
    /// table entry's index.
    pub(super) fn get(
        &mut self,
        topology: Topology,
        ticks: Tick,
        ladder: &Ladder,
    ) -> Option<(&DMatrix<f64>, usize)> {
        self.clock += 1;
        if let Some(k) = self
            .slots
            .iter()
            .position(|s| s.topology == topology && s.ticks == ticks)
        {
            self.slots[k].used = self.clock;
            return Some((&self.slots[k].stacked, self.slots[k].id));
        }
        // Spans that vary from period to period must not push out the ones that recur,
        // so the least recently seen entry of the tally gives way.
        let clock = self.clock;
        let found = self
            .tally
            .iter()
            .position(|t| t.0 == topology && t.1 == ticks);
        let k = found.unwrap_or_else(|| (0..TALLY).min_by_key(|&k| self.tally[k].3).unwrap_or(0));
        let t = &mut self.tally[k];
        *t = match found {
            Some(_) => (topology, ticks, t.2 + 1, clock),
            None => (topology, ticks, 1, clock),
        };
        if t.2 < RECUR {
            return None;
        }
        *t = (Topology(u64::MAX), 0, 0, 0);
        let k = (0..SLOTS).min_by_key(|&k| self.slots[k].used).unwrap_or(0);
        self.build(k, topology, ticks, ladder);
        Some((&self.slots[k].stacked, self.slots[k].id))
    }

    /// Multiplies the entries of the digits of `ticks` (propagators of one topology
    /// commute) into slot `k`: the lower digits' Φ into `partial`, then the highest
    /// digit's entry times that, which keeps the entry's row layout.
    fn build(&mut self, k: usize, topology: Topology, ticks: Tick, ladder: &Ladder) {
        let nz = ladder.nz;
        let (mut rest, mut j) = (ticks, 0);
        let mut pending: Option<usize> = None;
        let mut have_partial = false;
        while rest != 0 {
            let d = rest & ((1 << ladder.bits) - 1);
            rest >>= ladder.bits;
            if d != 0 {
                if let Some(e) = pending {
                    ladder.phi_into(ladder.entry(e), &mut self.phi);
                    if have_partial {
                        multiply(&self.phi, nz, &self.partial, &mut self.next);
                        std::mem::swap(&mut self.partial, &mut self.next);
                    } else {
                        self.partial.copy_from(&self.phi);
                        have_partial = true;
                    }
                }
                pending = Some(ladder.index(j, d));
            }
            j += 1;
        }
        self.builds += 1;
        let slot = &mut self.slots[k];
        if let Some(e) = pending {
            let last = ladder.entry(e);
            if have_partial {
                multiply(last, ladder.rows, &self.partial, &mut slot.stacked);
            } else {
                slot.stacked.copy_from(last);
            }
        }
        slot.topology = topology;
        slot.ticks = ticks;
        slot.used = self.clock;
        slot.id = ladder.entry_count() + self.builds;
    }
}

/// out = a·b with a of leading dimension `lda` (its first out.nrows() rows), b square
/// with as many rows as a has columns.
fn multiply(a: &DMatrix<f64>, lda: usize, b: &DMatrix<f64>, out: &mut DMatrix<f64>) {
    let (n, nz) = (out.nrows(), b.nrows());
    kernel::matmul(a.as_slice(), lda, b.as_slice(), nz, out.as_mut_slice(), n);
}
