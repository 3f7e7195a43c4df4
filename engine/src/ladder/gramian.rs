//! Meter integrals from the sums of the steps taken, formed only when a meter is read.
//!
//! A meter over a step of h from z is zᵀ·W(h)·z with W(h) = ∫₀ʰ Φ(s)ᵀ Q Φ(s) ds, so
//! over every step of one table entry it is tr(Q·L(h, S)) with S = Σ z·zᵀ and
//! L(h, X) = ∫₀ʰ Φ(s) X Φ(s)ᵀ ds. L does not depend on the meter: one L per topology
//! serves every meter. And L folds down the ladder: splitting the integral at a,
//! L(a + b, X) = L(a, X) + L(b, Φ(a) X Φ(a)ᵀ) (Φ(a + s) = Φ(s)Φ(a)), so an entry's sum
//! goes to the binary rungs of its set bits, and from the top,
//! L(2h, X) = L(h, X + Φ(h) X Φ(h)ᵀ), every rung's sum ends in one integral over one
//! tick, by Van Loan's block exponential ([`super::tick_gramian`]). A topology costs
//! two products per rung when read, and nothing while stepping beyond the sums.

use nalgebra::DMatrix;

use super::{tick_gramian, Ladder, TimeGrid};

/// Σ_e L(h_e, S_e) over the entries e of `ladder` (state matrix `m`, grid `grid`),
/// S_e the nz × nz blocks of `sums` in entry order (column-major).
pub(crate) fn step_gramian(
    ladder: &Ladder,
    m: &DMatrix<f64>,
    grid: &TimeGrid,
    sums: &[f64],
) -> DMatrix<f64> {
    let nz = ladder.nz;
    let per_digit = (1usize << ladder.bits) - 1;
    let mut at_rung: Vec<Option<DMatrix<f64>>> = vec![None; grid.levels as usize + 1];
    for (entry, block) in sums.chunks_exact(nz * nz).enumerate() {
        if block.iter().all(|&v| v == 0.0) {
            continue;
        }
        let s = DMatrix::from_column_slice(nz, nz, block);
        let (j, d) = ((entry / per_digit) as u32, (entry % per_digit + 1) as u64);
        // The set bits of d·R^j, lowest first; `done` the digit value stepped so far.
        let mut done = 0u64;
        for bit in (0..ladder.bits).filter(|b| d >> b & 1 == 1) {
            let x = if done == 0 {
                s.clone()
            } else {
                let phi = ladder.phi(ladder.index(j, done));
                &phi * &s * phi.transpose()
            };
            add_to(&mut at_rung[(j * ladder.bits + bit) as usize], x);
            done |= 1 << bit;
        }
    }
    let mut carry: Option<DMatrix<f64>> = None;
    for p in (1..at_rung.len()).rev() {
        if let Some(x) = at_rung[p].take() {
            add_to(&mut carry, x);
        }
        if let Some(x) = carry.take() {
            let phi = ladder.phi(ladder.index((p as u32 - 1) / ladder.bits, 1 << ((p as u32 - 1) % ladder.bits)));
            let moved = &phi * &x * phi.transpose();
            carry = Some(x + moved);
        }
    }
    if let Some(x) = at_rung[0].take() {
        add_to(&mut carry, x);
    }
    match carry {
        Some(x) => tick_gramian(m, &x, grid),
        None => DMatrix::zeros(nz, nz),
    }
}

fn add_to(acc: &mut Option<DMatrix<f64>>, x: DMatrix<f64>) {
    *acc = Some(match acc.take() {
        Some(a) => a + x,
        None => x,
    });
}
