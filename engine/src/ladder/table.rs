//! The step table of one topology: propagators for steps of d·R^j ticks (R = 2^bits,
//! 0 < d < R), each stacked with the event rows it carries ahead.
//!
//! Any step of n ticks is the product of the entries of n's nonzero digits, about
//! (bits of n)·(1 − 1/R)/bits products instead of one per set bit, and event bisection
//! searches one digit at a time. Rows of an entry are ordered [Φ_x; E·Φ; Φ_u]: the
//! dynamic states x, the event functions, then u = [1; w; s] (see [`crate::Layout`]),
//! which no state feeds. So Φ·z = A_x·x + A_u·u, where A_u·u stays the same from step
//! to step while the sources hold still, and the rows of u never need A_x.

use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::OnceLock;

use nalgebra::DMatrix;

use super::{oscillation_limit, quiet_ticks, rungs_by_doubling, Tick, TimeGrid};
use crate::kernel::{self, Operand};

/// The cached propagators of one topology (see the module documentation). Entries are
/// formed when first read, each by the same product from the same inputs whenever that
/// is, so a ladder is one pure function of its inputs however a run walks it: a
/// shooting search on a fine trial grid reads a few dozen of its ~150 entries.
pub struct Ladder {
    /// Bits per digit.
    pub bits: u32,
    /// Length of z.
    pub nz: usize,
    /// Dynamic states: z = [x; u] with x of this length.
    pub nx: usize,
    /// Event rows in each entry (diode functions, then event signals), from row nx.
    pub n_events: usize,
    /// Rows of each entry: nz + n_events rounded up to a multiple of 4 (zero rows), so
    /// products run in whole register blocks.
    pub rows: usize,
    /// Highest binary rung (2^top ticks) used for a plain step in this topology.
    pub top: u32,
    /// Steps of at most this many ticks are shorter than every time scale of the
    /// topology (‖M‖₁·h ≤ 1, [`quiet_ticks`]).
    pub quiet: Tick,
    /// Whether every rung is finite (a propagator overflows on a topology with a fast
    /// unstable mode and a long rung); every entry is a product of rungs no longer than
    /// the step it spans.
    pub finite: bool,
    /// Digit position of a tick count by its highest set bit: b / bits for b = 0..64
    /// (a table read instead of a division at every step).
    digit_of_bit: [u8; 64],
    /// Φ_p for p = 0..=levels ([`rungs_by_doubling`]).
    rungs: Vec<DMatrix<f64>>,
    /// The event rows E (n_events × nz).
    events: DMatrix<f64>,
    /// Entry (j, d) at [`Ladder::index`]: [Φ_x; E·Φ; Φ_u] for a step of d·R^j ticks,
    /// `rows` × nz, column-major.
    entries: Vec<OnceLock<DMatrix<f64>>>,
    /// Entries formed so far (for the memory the ladder holds).
    formed: AtomicUsize,
}

impl Ladder {
    /// Builds the ladder of state matrix `m` (augmented, nz × nz) whose first `nx`
    /// states are the dynamic ones, with event rows `events` (n_events × nz) and `bits`
    /// per digit.
    pub fn build(
        m: &DMatrix<f64>,
        nx: usize,
        grid: &TimeGrid,
        events: &DMatrix<f64>,
        bits: u32,
    ) -> Ladder {
        let (nz, n_events) = (m.nrows(), events.nrows());
        debug_assert!(
            m.view((nx, 0), (nz - nx, nx)).iter().all(|&v| v == 0.0),
            "a state feeds u"
        );
        let rungs = rungs_by_doubling(m, nx, grid);
        let rows = (nz + n_events).div_ceil(4) * 4;
        let entries = (0..step_count(bits, grid.levels))
            .map(|_| OnceLock::new())
            .collect();
        Ladder {
            finite: rungs
                .iter()
                .all(|r| r.as_slice().iter().all(|v| v.is_finite())),
            top: oscillation_limit(m, nx, grid),
            quiet: quiet_ticks(m, grid),
            bits,
            nz,
            nx,
            n_events,
            rows,
            digit_of_bit: std::array::from_fn(|b| (b as u32 / bits) as u8),
            rungs,
            events: events.clone(),
            entries,
            formed: AtomicUsize::new(0),
        }
    }

    /// Entries in the table (built or not).
    pub fn entry_count(&self) -> usize {
        self.entries.len()
    }

    /// Bytes of matrices the ladder holds now: its rungs and the entries formed so far.
    pub fn bytes(&self) -> usize {
        let rungs: usize = self.rungs.iter().map(|r| r.len()).sum();
        let entries = self.formed.load(Ordering::Relaxed) * self.rows * self.nz;
        (rungs + entries) * std::mem::size_of::<f64>()
    }

    /// Entry `e` (see [`Ladder::index`]), formed now if no step has read it before.
    ///
    /// Every entry is S₀·Φ, and S₀·Φ(d·R^j) = (S₀·Φ((d − 2^b)·R^j))·Φ(2^b·R^j) with 2^b
    /// the highest power of two in d: one product of the stacked rows per entry, the
    /// event rows carried along, and an entry needs at most bits − 1 shorter ones of its
    /// own digit (those of d's leading binary digits), not every value below it.
    pub fn entry(&self, e: usize) -> &DMatrix<f64> {
        self.entries[e].get_or_init(|| {
            let per_digit = (1usize << self.bits) - 1;
            let (j, d) = (e / per_digit, e % per_digit + 1);
            let b = d.ilog2() as usize;
            let rung = &self.rungs[j * self.bits as usize + b];
            let rest = d - (1 << b);
            let mut stacked = DMatrix::<f64>::zeros(self.rows, self.nz);
            if rest == 0 {
                self.stack(rung, &mut stacked);
            } else {
                self.times_rung(self.entry(j * per_digit + rest - 1), rung, &mut stacked);
            }
            self.formed.fetch_add(1, Ordering::Relaxed);
            stacked
        })
    }

    /// out = before·Φ for stacked rows `before` (this layout) and a rung Φ, using that
    /// no state feeds u: Φ's rows of u are zero in the columns of x, so out's columns of
    /// x need before's columns of x only, and their rows of u stay zero. The same sums in
    /// the same order as the full product without its terms that are exactly zero; `out`
    /// comes zeroed.
    fn times_rung(&self, before: &DMatrix<f64>, rung: &DMatrix<f64>, out: &mut DMatrix<f64>) {
        let (nx, nz, rows) = (self.nx, self.nz, self.rows);
        let (b, r) = (before.as_slice(), rung.as_slice());
        // A column of x has zeros in the rows of u (no state feeds u), left as they are.
        let a = Operand {
            a: b,
            lda: rows,
            rows,
            inner: nz,
        };
        kernel::times_fed(a, self.u_row(), r, nx, out.as_mut_slice(), rows);
    }

    /// out = S₀·Φ for a rung Φ: its rows of x and of u as they are, the event rows E·Φ
    /// (the product by S₀ without its unit rows).
    fn stack(&self, rung: &DMatrix<f64>, out: &mut DMatrix<f64>) {
        let (nx, nz, rows, head) = (self.nx, self.nz, self.rows, self.u_row());
        let (e, r) = (self.events.as_slice(), rung.as_slice());
        for (column, phi) in out
            .as_mut_slice()
            .chunks_exact_mut(rows)
            .zip(r.chunks_exact(nz))
        {
            column[..nx].copy_from_slice(&phi[..nx]);
            column[head..head + nz - nx].copy_from_slice(&phi[nx..]);
        }
        let ne = self.n_events;
        let events = out.as_mut_slice().split_at_mut(nx).1;
        let a = Operand {
            a: e,
            lda: ne,
            rows: ne,
            inner: nz,
        };
        kernel::times_fed(a, ne, r, nx, events, rows);
    }

    /// Φ of entry `entry` in z's own order (nz × nz), newly allocated; for work done
    /// outside the stepping loop (meters when they are read).
    pub fn phi(&self, entry: usize) -> DMatrix<f64> {
        let mut phi = DMatrix::zeros(self.nz, self.nz);
        self.phi_into(self.entry(entry), &mut phi);
        phi
    }

    /// Index of entry (j, d).
    pub fn index(&self, j: u32, d: u64) -> usize {
        let radix = 1usize << self.bits;
        j as usize * (radix - 1) + d as usize - 1
    }

    /// Ticks of entry (j, d).
    pub fn ticks(&self, j: u32, d: u64) -> Tick {
        d << (self.bits * j)
    }

    /// The longest entry not longer than `m` ≥ 1 ticks: (j, d) with d the leading
    /// digit of m.
    pub fn longest_within(&self, m: Tick) -> (u32, u64) {
        let j = u32::from(self.digit_of_bit[(63 - m.leading_zeros()) as usize]);
        (j, m >> (self.bits * j))
    }

    /// First row of u in an entry's output.
    pub fn u_row(&self) -> usize {
        self.nx + self.n_events
    }

    /// The sources' part of an entry (or of any matrix of its layout) applied to u:
    /// b = A_u·u, all rows.
    pub fn source_part(&self, stacked: &DMatrix<f64>, u: &[f64], b: &mut [f64]) {
        kernel::matvec_rows(&stacked.as_slice()[self.nx * self.rows..], self.rows, u, b);
    }

    /// One step: out = b + A_x·x on the rows of x and the events, with b the entry's
    /// [`Ladder::source_part`]; the rows of u are b's. The same sums in the same order
    /// whether b was just computed or kept from an earlier step.
    pub fn step(&self, stacked: &DMatrix<f64>, z: &[f64], b: &[f64], out: &mut [f64]) {
        let head = self.u_row();
        let a = stacked.as_slice();
        kernel::matvec_add(a, self.rows, &z[..self.nx], &b[..head], &mut out[..head]);
        out[head..].copy_from_slice(&b[head..]);
    }

    /// [`Ladder::step`] without the event rows (they are left as they were): a move
    /// whose event values nobody reads, as a digit of an event search. The rows of x
    /// and u are the same sums as `step` forms.
    pub fn step_state(&self, stacked: &DMatrix<f64>, z: &[f64], b: &[f64], out: &mut [f64]) {
        let (nx, head) = (self.nx, self.u_row());
        let a = stacked.as_slice();
        kernel::matvec_add(a, self.rows, &z[..nx], &b[..nx], &mut out[..nx]);
        out[head..].copy_from_slice(&b[head..]);
    }

    /// Event row `r` one entry ahead of z: (E·Φ)_r · z.
    pub fn event_ahead(&self, entry: usize, r: usize, z: &[f64]) -> f64 {
        let row = &self.entry(entry).as_slice()[self.nx + r..];
        kernel::strided_dot(row, self.rows, z)
    }

    /// The new state from a step's output: x from the first rows, u from the last.
    pub fn state_from(&self, out: &[f64], z: &mut [f64]) {
        z[..self.nx].copy_from_slice(&out[..self.nx]);
        let head = self.u_row();
        z[self.nx..].copy_from_slice(&out[head..head + self.nz - self.nx]);
    }

    /// Φ of an entry in z's own order (nz × nz), gathered from its rows.
    pub fn phi_into(&self, stacked: &DMatrix<f64>, phi: &mut DMatrix<f64>) {
        let (nx, nz, head) = (self.nx, self.nz, self.u_row());
        for c in 0..nz {
            let column = &stacked.as_slice()[c * self.rows..(c + 1) * self.rows];
            let out = &mut phi.as_mut_slice()[c * nz..(c + 1) * nz];
            out[..nx].copy_from_slice(&column[..nx]);
            out[nx..].copy_from_slice(&column[head..head + nz - nx]);
        }
    }
}

/// Entries in a table of `bits` per digit on `levels` (memory is counted from it
/// before a table is filled).
pub(super) fn step_count(bits: u32, levels: u32) -> usize {
    step_lengths(bits, levels).len()
}

/// Tick counts of the table's entries in index order: d·R^j for j = 0, 1, … and
/// 0 < d < R, up to 2^levels.
fn step_lengths(bits: u32, levels: u32) -> Vec<Tick> {
    let radix: Tick = 1 << bits;
    let mut out = Vec::new();
    let mut j = 0;
    while j * bits <= levels {
        for d in 1..radix {
            let ticks = d << (j * bits);
            if ticks <= 1 << levels {
                out.push(ticks);
            }
        }
        j += 1;
    }
    out
}
