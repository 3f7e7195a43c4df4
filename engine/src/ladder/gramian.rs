//! Meter integrals from the sums of the steps taken, formed only when a meter is read.
//!
//! A meter over a step of h from z is zᵀ·W(h)·z with W(h) = ∫₀ʰ Φ(s)ᵀ Q Φ(s) ds, so
//! over every step of one table entry it is tr(Q·L(h, S)) with S = Σ z·zᵀ and
//! L(h, X) = ∫₀ʰ Φ(s) X Φ(s)ᵀ ds. L does not depend on the meter: one L per topology
//! serves every meter. And L folds down the ladder: splitting the integral at a,
//! L(a + b, X) = L(a, X) + L(b, Φ(a) X Φ(a)ᵀ) (Φ(a + s) = Φ(s)Φ(a)), so an entry's
//! sum goes to the binary rungs of its length's set bits, and from the top,
//! L(2h, X) = L(h, X + Φ(h) X Φ(h)ᵀ), every rung's sum ends in one integral over one
//! tick, by its Taylor series ([`super::tick_gramian`]). A topology costs
//! two products per rung when read, and nothing while stepping beyond the sums.

use nalgebra::DMatrix;

use super::{tick_gramian, Ladder, TimeGrid};
use crate::kernel;

/// Σ_e L(h_e, S_e) over the entries e of `ladder` (state matrix `m`, grid `grid`),
/// S_e = `sums(e)` (nz × nz, column-major), `None` for an entry no step took.
///
/// An entry of d·a ticks (a = R^j) splits at its highest binary digit 2^b·a:
/// L(d·a, S) = L(2^b·a, S) + L((d − 2^b)·a, Φ(2^b·a) S Φ(2^b·a)ᵀ), so its sum goes to
/// the binary rungs of d's set bits, one congruence per further bit: a few per entry
/// used, whatever the radix, and nothing for an entry no step took.
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
    // Φ over 2^p ticks by binary level p, gathered from the table when first needed.
    let mut powers: Vec<Option<DMatrix<f64>>> = vec![None; grid.levels as usize + 1];
    let power = |p: usize| ladder.phi(ladder.index(p as u32 / bits, 1 << (p as u32 % bits)));
    for e in 0..ladder.entry_count() {
        let Some(block) = sums(e) else { continue };
        let (j, d) = (e / per_digit, e % per_digit + 1);
        let mut x = DMatrix::from_column_slice(nz, nz, block);
        let mut rest = d;
        loop {
            let b = rest.ilog2() as usize;
            let p = j * bits as usize + b;
            rest -= 1 << b;
            if rest == 0 {
                add_to(&mut at_rung[p], x);
                break;
            }
            let phi = powers[p].get_or_insert_with(|| power(p));
            let moved = congruence(phi, &x);
            add_to(&mut at_rung[p], x);
            x = moved;
        }
    }
    // From the top, L(2h, X) = L(h, X + Φ(h) X Φ(h)ᵀ).
    let mut carry: Option<DMatrix<f64>> = None;
    for p in (1..at_rung.len()).rev() {
        if let Some(x) = at_rung[p].take() {
            add_to(&mut carry, x);
        }
        if let Some(x) = carry.take() {
            let phi = powers[p - 1].get_or_insert_with(|| power(p - 1));
            let moved = congruence(phi, &x);
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
