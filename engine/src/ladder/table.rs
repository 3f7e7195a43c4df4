//! The step table of one topology: propagators for steps of d·R^j ticks (R = 2^bits,
//! 0 < d < R), each stacked with the event rows it carries ahead.
//!
//! Any step of n ticks is the product of the entries of n's nonzero digits, about
//! (bits of n)·(1 − 1/R)/bits products instead of one per set bit, and event bisection
//! searches one digit at a time. Rows of an entry are ordered [Φ_x; E·Φ; Φ_u]: the
//! dynamic states x, the event functions, then u = [1; w; s] (see [`crate::Layout`]),
//! which no state feeds. So Φ·z = A_x·x + A_u·u, where A_u·u stays the same from step
//! to step while the sources hold still, and the rows of u never need A_x.

use nalgebra::DMatrix;

use super::{oscillation_limit, rungs_by_squaring, Tick, TimeGrid};
use crate::kernel;

/// The cached propagators of one topology (see the module documentation).
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
    /// Entry (j, d) at [`Ladder::index`]: [Φ_x; E·Φ; Φ_u] for a step of d·R^j ticks,
    /// `rows` × nz, column-major.
    pub steps: Vec<DMatrix<f64>>,
    /// Highest binary rung (2^top ticks) used for a plain step in this topology.
    pub top: u32,
    /// Whether every entry is finite (a propagator overflows on a topology with a fast
    /// unstable mode and a long rung).
    pub finite: bool,
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
        let rungs = rungs_by_squaring(m, grid);
        let (nz, n_events) = (m.nrows(), events.nrows());
        let rows = (nz + n_events).div_ceil(4) * 4;
        // Every entry is S₀·Φ with S₀ = [I_x; E; I_u] (the layout of Φ = I), and within
        // one digit S₀·Φ(d·R^j) = (S₀·Φ((d − 1)·R^j))·Φ(R^j): one product of the
        // stacked rows per entry, the event rows carried along.
        let mut identity = DMatrix::<f64>::zeros(rows, nz);
        for c in 0..nx {
            identity[(c, c)] = 1.0;
        }
        identity.rows_mut(nx, n_events).copy_from(events);
        for c in nx..nz {
            identity[(n_events + c, c)] = 1.0;
        }
        let mut steps: Vec<DMatrix<f64>> = Vec::new();
        for ticks in step_lengths(bits, grid.levels) {
            let lowest = ticks.trailing_zeros();
            let unit = lowest - lowest % bits;
            let rung = &rungs[unit as usize];
            let before = if ticks == 1 << unit {
                &identity
            } else {
                steps.last().expect("the entry one digit value shorter")
            };
            let mut stacked = DMatrix::<f64>::zeros(rows, nz);
            kernel::matmul(
                before.as_slice(),
                rows,
                rung.as_slice(),
                nz,
                stacked.as_mut_slice(),
                rows,
            );
            steps.push(stacked);
        }
        let top = oscillation_limit(m, nx, grid);
        let finite = steps.iter().all(|p| p.iter().all(|v| v.is_finite()));
        Ladder {
            finite,
            bits,
            nz,
            nx,
            n_events,
            rows,
            steps,
            top,
        }
    }

    /// Φ of entry `entry` in z's own order (nz × nz), newly allocated; for work done
    /// outside the stepping loop (meters when they are read).
    pub fn phi(&self, entry: usize) -> DMatrix<f64> {
        let mut phi = DMatrix::zeros(self.nz, self.nz);
        self.phi_into(&self.steps[entry], &mut phi);
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
        let j = (63 - m.leading_zeros()) / self.bits;
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

    /// Event row `r` one entry ahead of z: (E·Φ)_r · z.
    pub fn event_ahead(&self, entry: usize, r: usize, z: &[f64]) -> f64 {
        let row = &self.steps[entry].as_slice()[self.nx + r..];
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
/// before a table is built).
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
