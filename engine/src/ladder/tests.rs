//! The ladder's construction against independent computations of the same matrices.

use std::sync::Arc;

use nalgebra::DMatrix;

use super::table::Ladder;
use super::{rungs_by_squaring, shared_ladder, step_gramian, van_loan, TimeGrid};

/// The grid of a 150 kHz converter (SimOptions::for_period): a quarter period per
/// longest step, events to 1 ps, 21 rungs.
fn converter_grid() -> TimeGrid {
    let period = 1.0 / 150e3;
    TimeGrid::new(period / 4.0, (1e-9 * period).max(1e-12)).expect("valid grid")
}

/// Augmented ż = M z, z = [x; 1]: a non-normal A with the spread of a switched
/// converter (a 1 MΩ off-state across 20 µH, |λ| = 5e10 /s; an LC pair ringing at
/// 20 kHz; slow output poles), coupled upward, and a constant source column.
fn stiff_m() -> DMatrix<f64> {
    let w = 2.0 * std::f64::consts::PI * 20e3;
    let a = [
        [-5e10, 3e9, 0.0, 1e4, 0.0],
        [0.0, -2e3, w, 0.0, 5e2],
        [0.0, -w, -2e3, 3e3, 0.0],
        [0.0, 0.0, 0.0, -4e4, 1e3],
        [0.0, 0.0, 0.0, 0.0, -1e3],
    ];
    let mut m = DMatrix::zeros(6, 6);
    for (i, row) in a.iter().enumerate() {
        for (j, &v) in row.iter().enumerate() {
            m[(i, j)] = v;
        }
        m[(i, 5)] = 1e5 * (i as f64 + 1.0);
    }
    m
}

fn norm1(a: &DMatrix<f64>) -> f64 {
    a.column_iter().map(|c| c.abs().sum()).fold(0.0, f64::max)
}

#[test]
fn rungs_match_the_exponential() {
    // The rungs against the Padé exponential of each rung on its own (Higham, "The
    // scaling and squaring method for the matrix exponential revisited", SIAM J.
    // Matrix Anal. Appl. 26 (2005), the algorithm nalgebra implements). Squaring from
    // the last rung within θ₁₃ repeats the exponential's own squarings, so the two
    // agree to round-off (measured 3.5e-14 on both grids: the products differ in summation
    // order only, each difference doubled by the squarings above it); squaring from the
    // shortest rung instead would be off by up to 2^21·u ≈ 2e-10 relative on the slow
    // mode (module documentation of `ladder.rs`), which 1e-12 relative would catch.
    // A second grid with a tick of 1e-12 of the period (the shooting trial grid, 38
    // rungs) puts a score of rungs below the Taylor bound (`short_exp`).
    let period = 1.0 / 150e3;
    let trial = TimeGrid::new(period / 4.0, 1e-12 * period).expect("valid grid");
    let m = stiff_m();
    for grid in [converter_grid(), trial] {
        let rungs = rungs_by_squaring(&m, &grid);
        assert_eq!(rungs.len(), grid.levels as usize + 1);
        let mut worst: f64 = 0.0;
        for (p, rung) in rungs.iter().enumerate() {
            let full = (&m * grid.rung(p as u32)).exp();
            let rel = norm1(&(rung - &full)) / norm1(&full).max(1.0);
            worst = worst.max(rel);
        }
        println!(
            "{} rungs vs exponential: worst relative 1-norm error {worst:.2e}",
            grid.levels + 1
        );
        assert!(worst < 1e-12, "squaring error {worst:e}");
    }
}

/// A non-stiff M (|λ| h ≤ 2 on the longest step), so Van Loan's block exponential can
/// be taken over every table entry directly.
fn mild_m() -> DMatrix<f64> {
    let mut m = stiff_m();
    m[(0, 0)] = -1e6;
    m[(0, 1)] = 3e5;
    m
}

#[test]
fn meters_from_sums_match_van_loan_per_entry() {
    // Σ_e tr(W_e·S_e), W_e = ∫₀^{h_e} Φᵀ Q Φ by Van Loan's block exponential over each
    // entry's whole step (Van Loan, "Computing integrals involving the matrix
    // exponential", IEEE TAC 23 (1978), Theorem 1), against tr(Q·L) with L folded down
    // the rungs to one tick (gramian.rs). Same integral, different round-off: 1e-12
    // relative is some hundred times the round-off of either.
    let (m, grid) = (mild_m(), converter_grid());
    let nz = m.nrows();
    let q = DMatrix::from_fn(nz, nz, |i, j| 1.0 / (1.0 + i as f64 + j as f64));
    for bits in [1, 4] {
        let ladder = Ladder::build(&m, 5, &grid, &DMatrix::zeros(1, nz), bits);
        let entries = ladder.steps.len();
        let mut sums = vec![0.0; entries * nz * nz];
        let mut expected = 0.0;
        for e in (0..entries).step_by(3) {
            let z = DMatrix::from_fn(nz, 1, |i, _| ((e * 7 + i * 3) % 5) as f64 - 1.5);
            let s = &z * z.transpose();
            sums[e * nz * nz..(e + 1) * nz * nz].copy_from_slice(s.as_slice());
            let per_digit = (1usize << bits) - 1;
            let (j, d) = ((e / per_digit) as u32, (e % per_digit + 1) as u64);
            let h = grid.time(ladder.ticks(j, d));
            expected += (van_loan(&m, &q, h) * &s).trace();
        }
        let l = step_gramian(&ladder, &m, &grid, &sums);
        let got = (&q * l).trace();
        let rel = (got - expected).abs() / expected.abs();
        println!("bits {bits}: folded {got:.15e}, per entry {expected:.15e}, rel {rel:.1e}");
        assert!(rel < 1e-12, "bits {bits}: relative difference {rel:e}");
    }
}

#[test]
fn shared_ladders_are_found_only_for_bit_equal_inputs() {
    // A ladder is a pure function of its inputs: equal inputs get the one already built,
    // and one changed bit of M gets a ladder of its own.
    let (m, grid) = (stiff_m(), converter_grid());
    let events = DMatrix::from_fn(2, m.ncols(), |i, j| (i + j) as f64);
    let first = shared_ladder(&m, 5, &grid, &events, 4);
    let again = shared_ladder(&m.clone(), 5, &grid, &events.clone(), 4);
    assert!(Arc::ptr_eq(&first, &again));
    let mut nudged = m.clone();
    nudged[(1, 1)] = f64::from_bits(nudged[(1, 1)].to_bits() + 1);
    let other = shared_ladder(&nudged, 5, &grid, &events, 4);
    assert!(!Arc::ptr_eq(&first, &other));
    let fresh = Ladder::build(&m, 5, &grid, &events, 4);
    for (a, b) in fresh.steps.iter().zip(&first.steps) {
        assert!(a
            .iter()
            .zip(b.iter())
            .all(|(x, y)| x.to_bits() == y.to_bits()));
    }
}
