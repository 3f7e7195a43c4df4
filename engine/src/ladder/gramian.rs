//! Meter integrals from the sums of the steps taken, formed only when a meter is read.
//!
//! A meter over a step of h from z is zᵀ·W(h)·z with W(h) = ∫₀ʰ Φ(s)ᵀ Q Φ(s) ds, so
//! over every step of one table entry it is tr(Q·L(h, S)) with S = Σ z·zᵀ and
//! L(h, X) = ∫₀ʰ Φ(s) X Φ(s)ᵀ ds. L does not depend on the meter: one L per topology
//! serves every meter. And L folds down the ladder: splitting the integral at a,
//! L(a + b, X) = L(a, X) + L(b, Φ(a) X Φ(a)ᵀ) (Φ(a + s) = Φ(s)Φ(a)), so the sums of a
//! digit's entries go to that digit's rung, and from the top,
//! L(2h, X) = L(h, X + Φ(h) X Φ(h)ᵀ), every rung's sum ends in one integral over one
//! tick, by its Taylor series ([`super::tick_gramian`]). A topology costs
//! two products per rung when read, and nothing while stepping beyond the sums.

use nalgebra::DMatrix;

use super::{tick_gramian, Ladder, TimeGrid};
use crate::kernel;

/// Σ_e L(h_e, S_e) over the entries e of `ladder` (state matrix `m`, grid `grid`),
/// S_e = `sums(e)` (nz × nz, column-major), `None` for an entry no step took.
///
/// Within digit j (a = R^j), Σ_d L(d·a, S_d) = L(a, Σ_i Φ_aⁱ G_i Φ_aⁱᵀ) with G_i the sum
/// of S_d over d > i, formed by Horner's rule from the highest d: one congruence per
/// digit value from the highest one used, and nothing for a digit no step used.
pub(crate) fn step_gramian<'a>(
    ladder: &Ladder,
    m: &DMatrix<f64>,
    grid: &TimeGrid,
    sums: impl Fn(usize) -> Option<&'a [f64]>,
) -> DMatrix<f64> {
    let nz = ladder.nz;
    let bits = ladder.bits;
    let per_digit = (1usize << bits) - 1;
    let mut at_rung: Vec<Option<DMatrix<f64>>> = vec![None; grid.levels as usize + 1];
    for j in 0..ladder.entry_count().div_ceil(per_digit) {
        let first = j * per_digit;
        let last = (first + per_digit).min(ladder.entry_count());
        let Some(top) = (first..last).rev().find(|&e| sums(e).is_some()) else {
            continue;
        };
        let phi = ladder.phi(ladder.index(j as u32, 1));
        let mut suffix = DMatrix::<f64>::zeros(nz, nz);
        let mut horner: Option<DMatrix<f64>> = None;
        for e in (first..=top).rev() {
            if let Some(block) = sums(e) {
                suffix += DMatrix::from_column_slice(nz, nz, block);
            }
            horner = Some(match horner {
                Some(h) => &suffix + congruence(&phi, &h),
                None => suffix.clone(),
            });
        }
        if let Some(h) = horner {
            add_to(&mut at_rung[j * bits as usize], h);
        }
    }
    // From the top, L(2h, X) = L(h, X + Φ(h) X Φ(h)ᵀ).
    let mut carry: Option<DMatrix<f64>> = None;
    for p in (1..at_rung.len()).rev() {
        if let Some(x) = at_rung[p].take() {
            add_to(&mut carry, x);
        }
        if let Some(x) = carry.take() {
            let below = (p - 1) as u32;
            let phi = ladder.phi(ladder.index(below / bits, 1 << (below % bits)));
            let moved = congruence(&phi, &x);
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

/// Φ·X·Φᵀ with the engine's kernel.
fn congruence(phi: &DMatrix<f64>, x: &DMatrix<f64>) -> DMatrix<f64> {
    let n = phi.nrows();
    let (mut left, mut out) = (DMatrix::zeros(n, n), DMatrix::zeros(n, n));
    kernel::matmul(phi.as_slice(), n, x.as_slice(), n, left.as_mut_slice(), n);
    let phi_t = phi.transpose();
    kernel::matmul(
        left.as_slice(),
        n,
        phi_t.as_slice(),
        n,
        out.as_mut_slice(),
        n,
    );
    out
}

fn add_to(acc: &mut Option<DMatrix<f64>>, x: DMatrix<f64>) {
    *acc = Some(match acc.take() {
        Some(a) => a + x,
        None => x,
    });
}
