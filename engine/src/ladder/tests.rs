//! The ladder's construction against independent computations of the same matrices.

use std::sync::Arc;

use nalgebra::DMatrix;

use super::table::Ladder;
use super::{differences, rungs_by_doubling, shared_ladder, step_gramian, tick_gramian, TimeGrid};

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

/// exp(M·h) of [`stiff_m`] in closed form by its block structure M = [[a, r], [0, B]]
/// (a scalar): exp(M·h) = [[e^{ah}, x], [0, e^{Bh}]] with x·(aI − B) = e^{ah}·r − r·e^{Bh},
/// the off-diagonal block of F·M = M·F for F = exp(M·h) (the commutation that Parlett's
/// recurrence rests on: Parlett, "A recurrence among the elements of functions of
/// triangular matrices", Linear Algebra Appl. 14 (1976)). aI − B is well conditioned (|a| = 5e10 /s dwarfs B) and
/// ‖B·h‖ stays below one on every rung here, so e^{Bh} needs no squaring: accurate to a
/// few units of round-off, whatever the stiffness.
fn stiff_exp(h: f64) -> DMatrix<f64> {
    let m = stiff_m();
    let a = m[(0, 0)];
    let r = m.view((0, 1), (1, 5)).into_owned();
    let b = m.view((1, 1), (5, 5)).into_owned();
    let eb = (&b * h).exp();
    let eah = (a * h).exp();
    let shifted = DMatrix::identity(5, 5) * a - &b;
    let x = (&r * eah - &r * &eb) * shifted.try_inverse().expect("a is no eigenvalue of B");
    let mut out = DMatrix::zeros(6, 6);
    out[(0, 0)] = eah;
    out.view_mut((0, 1), (1, 5)).copy_from(&x);
    out.view_mut((1, 1), (5, 5)).copy_from(&eb);
    out
}

#[test]
fn rungs_match_the_exponential() {
    // Every rung of the stiff M against the closed form of its exponential
    // ([`stiff_exp`]), beside the scaled-and-squared Padé exponential of each rung on
    // its own (Higham, "The scaling and squaring method for the matrix exponential
    // revisited", SIAM J. Matrix Anal. Appl. 26 (2005), the algorithm nalgebra
    // implements). Past θ₁₃ both square: each squaring doubles what the start carries,
    // and the rungs start from Φ − I held to round-off, so on the longest rung of the
    // converter grid they are measured 1.2e-13 from the closed form against 1.5e-12 for
    // the Padé exponential. 5e-13 bounds that with room for another processor's
    // rounding; squaring Φ from the shortest rung would be off by ~2e-10 on the slow mode
    // (module documentation of `ladder.rs`). The trial grid (a tick of 1e-12 of the
    // period, 39 rungs) starts far below the Taylor bound; a coarse grid (a tick of
    // 1e-4 of the period, ‖M‖₁·q ≈ 20) starts from the Padé exponential of its tick.
    let period = 1.0 / 150e3;
    let trial = TimeGrid::new(period / 4.0, 1e-12 * period).expect("valid grid");
    let coarse = TimeGrid::new(period / 4.0, 1e-4 * period).expect("valid grid");
    let m = stiff_m();
    for grid in [converter_grid(), trial, coarse] {
        let rungs = rungs_by_doubling(&m, m.nrows(), &grid);
        assert_eq!(rungs.len(), grid.levels as usize + 1);
        let (mut worst, mut pade): (f64, f64) = (0.0, 0.0);
        for (p, rung) in rungs.iter().enumerate() {
            let h = grid.rung(p as u32);
            let exact = stiff_exp(h);
            let scale = norm1(&exact).max(1.0);
            worst = worst.max(norm1(&(rung - &exact)) / scale);
            pade = pade.max(norm1(&((&m * h).exp() - &exact)) / scale);
        }
        println!(
            "{} rungs against the closed form: worst relative 1-norm error {worst:.2e} \
             (each rung's Padé exponential: {pade:.2e})",
            grid.levels + 1
        );
        assert!(worst < 5e-13, "rung error {worst:e}");
    }
}

#[test]
fn rungs_keep_a_slow_modes_decay() {
    // Φ − I of every rung of M = [[a, b], [0, c]] against its closed form: e^{ah} − 1,
    // e^{ch} − 1 and b·(e^{ah} − e^{ch})/(a − c) off the diagonal (the exponential of a
    // 2 × 2 triangular matrix, Moler & Van Loan, "Nineteen dubious ways to compute the
    // exponential of a matrix, twenty-five years later", SIAM Review 45 (2003), §2),
    // each from `f64::exp_m1`. A slow pole (a = −1e3 /s) beside a fast one (c = −1e8 /s)
    // on the trial grid, every rung doubled as its difference (‖M·h‖₁ ≤ θ₁₃, 34 of 39):
    // on the first rungs a·h ≈ 1e-20, so Φ − I formed from a Φ that holds I loses
    // everything; held as the difference, each entry is within 1e-14 relative (about 40
    // doublings of u allowed; measured 2e-16). Past the bound the rungs are Φ to
    // round-off relative to ‖Φ‖, as any exponential's (`rungs_match_the_exponential`).
    let (a, b, c) = (-1e3, 1e5, -1e8);
    let m = DMatrix::from_row_slice(2, 2, &[a, b, 0.0, c]);
    let period = 1.0 / 150e3;
    let grid = TimeGrid::new(period / 4.0, 1e-12 * period).expect("valid grid");
    let mut worst: f64 = 0.0;
    let norm = norm1(&m);
    let within = (0..=grid.levels)
        .take_while(|&p| norm * grid.rung(p) <= 5.37)
        .count();
    assert!(within > 30, "{within} rungs within θ₁₃");
    let within = differences(&m, 2, &grid, norm, within);
    for (p, f) in within.iter().enumerate() {
        let h = grid.rung(p as u32);
        let (ea, ec) = ((a * h).exp_m1(), (c * h).exp_m1());
        let want = [ea, ec, b * (ea - ec) / (a - c)];
        let got = [f[(0, 0)], f[(1, 1)], f[(0, 1)]];
        for (g, w) in got.iter().zip(want) {
            worst = worst.max((g - w).abs() / w.abs());
        }
    }
    println!("slow and fast pole, every rung: worst relative error of Φ − I {worst:.1e}");
    assert!(worst < 1e-14, "relative error {worst:e}");
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
    // Bits 6 is the table the runs use: digit values with up to six set bits.
    for bits in [1, 4, 6] {
        let ladder = Ladder::build(&m, 5, &grid, &DMatrix::zeros(1, nz), bits);
        let entries = ladder.entry_count();
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
        // Entries no step took are absent, as the run's sums leave them.
        let block = |e: usize| (e % 3 == 0).then(|| &sums[e * nz * nz..(e + 1) * nz * nz]);
        let l = step_gramian(&ladder, &m, &grid, block);
        let got = (&q * l).trace();
        let rel = (got - expected).abs() / expected.abs();
        println!("bits {bits}: folded {got:.15e}, per entry {expected:.15e}, rel {rel:.1e}");
        assert!(rel < 1e-12, "bits {bits}: relative difference {rel:e}");
    }
}

#[test]
fn one_ticks_integral_matches_van_loan() {
    // L(q, X) = ∫₀^q Φ X Φᵀ over one tick by the Taylor series on a sub-tick and
    // doubling, against Van Loan's block exponential over the whole tick (Van Loan,
    // IEEE TAC 23 (1978), Theorem 1; valid here, |λ|·q is far below its overflow). The
    // stiff M scaled by 20 has ‖M‖₁·q above the Taylor bound on the converter grid, so
    // the doublings are exercised; 1e-13 relative is some hundred times round-off.
    let period = 1.0 / 150e3;
    let trial = TimeGrid::new(period / 4.0, 1e-12 * period).expect("valid grid");
    for (scale, grid) in [
        (1.0, converter_grid()),
        (20.0, converter_grid()),
        (1.0, trial),
    ] {
        let m = stiff_m() * scale;
        let nz = m.nrows();
        let x = DMatrix::from_fn(nz, nz, |i, j| 1.0 / (1.0 + i as f64 + j as f64));
        let got = tick_gramian(&m, &x, &grid);
        let expected = van_loan(&m.transpose(), &x, grid.quantum);
        let rel = (&got - &expected).norm() / expected.norm();
        println!(
            "tick {:.2e} s, ‖M‖₁·q = {:.2e}: relative difference {rel:.1e}",
            grid.quantum,
            norm1(&m) * grid.quantum
        );
        assert!(rel < 1e-13, "relative difference {rel:e}");
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
    for e in (0..fresh.entry_count()).rev() {
        let (a, b) = (fresh.entry(e), first.entry(e));
        assert!(a
            .iter()
            .zip(b.iter())
            .all(|(x, y)| x.to_bits() == y.to_bits()));
    }
}

/// ∫₀ʰ exp(Aᵀs)·Q·exp(A s) ds by Van Loan's block exponential.
fn van_loan(a: &DMatrix<f64>, q: &DMatrix<f64>, h: f64) -> DMatrix<f64> {
    let n = a.nrows();
    let mut c = DMatrix::<f64>::zeros(2 * n, 2 * n);
    c.view_mut((0, 0), (n, n)).copy_from(&(-a.transpose() * h));
    c.view_mut((0, n), (n, n)).copy_from(&(q * h));
    c.view_mut((n, n), (n, n)).copy_from(&(a * h));
    let e = c.exp();
    let f = e.view((n, n), (n, n)).into_owned();
    let g = e.view((0, n), (n, n)).into_owned();
    let w = f.transpose() * g;
    // Symmetrise: the exact integral is symmetric; this removes round-off asymmetry.
    (&w + w.transpose()) * 0.5
}
