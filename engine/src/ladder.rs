//! The time grid and, per topology, the ladder of exact propagators on it.
//!
//! Time is an integer count of ticks of one quantum q, chosen no longer than the event
//! resolution. For each topology the propagators Φ_p = exp(M · 2^p q), p = 0..=P, are
//! computed once (each from the one below by doubling its difference from the
//! identity, [`rungs_by_doubling`]), and from their products a table of steps of d·R^j
//! ticks (R = 2^bits, 0 < d < R), each formed when a step first needs it.
//! Any step of n ticks is then the product of the entries of n's nonzero digits:
//! stepping and event bisection cost matrix–vector products only, never a new
//! exponential (the bit-walk of the "published methods" note — bisection on the
//! cached halvings — searched one radix-R digit at a time).
//!
//! Quadratic meters (energies) are exact integrals W = ∫₀ʰ Φ(s)ᵀ Q Φ(s) ds (Van Loan,
//! "Computing integrals involving the matrix exponential", IEEE TAC 1978): stepping
//! from z over h adds zᵀ W z, exact whatever the waveform. The integrals are formed
//! only when a meter is read, from the sums of the steps taken, folded down the rungs
//! to one tick (`gramian.rs`) and there summed as a Taylor series ([`tick_gramian`]).
//!
//! A topology's table depends only on M, the event rows, the grid and the radix, so
//! tables are shared between runs and cases whose inputs are bit-equal (`shared.rs`).

use nalgebra::{DMatrix, RowDVector};

use crate::error::EngineError;

mod gramian;
mod shared;
mod table;
pub(crate) use gramian::step_gramian;
pub use shared::clear_shared_ladders;
pub(crate) use shared::shared_ladder;
pub use table::Ladder;

/// Integer time: ticks of [`TimeGrid::quantum`].
pub type Tick = u64;

/// The run's time quantum and ladder height.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TimeGrid {
    /// Seconds per tick.
    pub quantum: f64,
    /// Ladder height P: the longest step is 2^P ticks.
    pub levels: u32,
}

impl TimeGrid {
    /// A grid whose longest step is `max_step` seconds and whose tick is at most
    /// `resolution` seconds.
    pub fn new(max_step: f64, resolution: f64) -> Result<Self, EngineError> {
        if !(max_step.is_finite() && max_step > 0.0) {
            return Err(EngineError::BadOption {
                what: "max_step",
                value: max_step,
                allowed: "a positive time in seconds",
            });
        }
        if !(resolution.is_finite() && resolution > 0.0 && resolution <= max_step) {
            return Err(EngineError::BadOption {
                what: "event_resolution",
                value: resolution,
                allowed: "a positive time no longer than max_step",
            });
        }
        let levels = (max_step / resolution).log2().ceil().max(0.0) as u32;
        if levels > 48 {
            return Err(EngineError::BadOption {
                what: "max_step / event_resolution",
                value: max_step / resolution,
                allowed: "at most 2^48",
            });
        }
        Ok(TimeGrid {
            quantum: max_step / 2f64.powi(levels as i32),
            levels,
        })
    }

    /// The tick nearest to `t` seconds (negative times clamp to 0).
    pub fn tick(&self, t: f64) -> Tick {
        (t / self.quantum).round().max(0.0) as Tick
    }

    /// Seconds at a tick.
    pub fn time(&self, tick: Tick) -> f64 {
        tick as f64 * self.quantum
    }

    /// Seconds of a ladder rung.
    pub fn rung(&self, p: u32) -> f64 {
        self.quantum * 2f64.powi(p as i32)
    }
}

/// Fraction of the period of the fastest lightly damped oscillation that one step may
/// span, so a threshold crossed and re-crossed within a step is not missed. Eight
/// samples per period is common practice for resolving a sinusoid's extremes.
const STEPS_PER_OSCILLATION: f64 = 8.0;

/// The rungs Φ_p = exp(M·2^p q), p = 0..=P. Those within θ₁₃ (‖M·h‖₁ ≤ θ₁₃) as their
/// differences from the identity F_p = Φ_p − I: from one Taylor polynomial on
/// M·q/2^s with ‖M·q/2^s‖₁ ≤ [`TAYLOR_NORM`] (s halvings below the tick when the
/// tick itself is longer), each rung from the one below by doubling,
/// F_{p+1} = 2F_p + F_p² ((I + F)² = I + 2F + F²), one product per rung. Past θ₁₃, each
/// rung as the square of the one below, Φ_{p+1} = Φ_p², as the scaling-and-squaring
/// exponential of each longer rung squares (Higham, "The scaling and squaring method
/// for the matrix exponential revisited", SIAM J. Matrix Anal. Appl. 26 (2005)), but
/// from a start held to round-off: each squaring doubles the error it is handed, and
/// on a stiff test matrix the longest rung lands 13× closer to the exponential's closed
/// form than the Padé exponential of that rung (`rungs_match_the_exponential`). A tick
/// itself past θ₁₃ is doubled up as a difference from a sub-tick all the same.
///
/// Why the difference: a rung near the identity holds a slow mode's decay
/// e^{−λh} ≈ 1 − λh only to u/(λh) relative once I is added, and squaring Φ doubles that
/// error at each rung (E_{p+1} ≈ Φ_p E_p + E_p Φ_p, Higham, *Functions of Matrices*,
/// SIAM 2008, §10.3), so squaring from a short rung costs a factor 2^k over k rungs.
/// F carries λh itself to unit round-off u (the Taylor terms of so small a norm do
/// not cancel, Moler & Van Loan, "Nineteen dubious ways to compute the exponential of a
/// matrix, twenty-five years later", SIAM Review 45 (2003), method 1), and 2F + F²
/// adds about u relative per doubling instead of doubling the error (a fast decaying
/// mode near θ₁₃ has F ≈ −1, where 2F + F² cancels to an absolute u, as Φ² would
/// round). A Padé exponential per rung within θ₁₃ (a fine trial grid has a score of
/// them) cost ten or more products; `rungs_match_the_exponential` and
/// `rungs_keep_a_slow_modes_decay` check both regimes against closed forms.
pub(crate) fn rungs_by_doubling(m: &DMatrix<f64>, nx: usize, grid: &TimeGrid) -> Vec<DMatrix<f64>> {
    let n = m.nrows();
    let norm = one_norm(m);
    let within = (0..=grid.levels)
        .take_while(|&p| norm * grid.rung(p) <= THETA_13)
        .count();
    // At least the tick itself as a difference, doubled up from a sub-tick when it is
    // past θ₁₃.
    let mut rungs: Vec<DMatrix<f64>> = differences(m, nx, grid, norm, within.max(1));
    for f in &mut rungs {
        for i in 0..n {
            f[(i, i)] += 1.0;
        }
    }
    while rungs.len() <= grid.levels as usize {
        let below = rungs.last().expect("the tick's rung");
        let mut square = DMatrix::zeros(n, n);
        square_fed(below, nx, &mut square);
        rungs.push(square);
    }
    rungs
}

/// F_p = Φ_p − I of the first `count` rungs, by Taylor on the tick (halved to within
/// [`TAYLOR_NORM`] if need be) and doubling.
pub(crate) fn differences(
    m: &DMatrix<f64>,
    nx: usize,
    grid: &TimeGrid,
    norm: f64,
    count: usize,
) -> Vec<DMatrix<f64>> {
    let n = m.nrows();
    if count == 0 {
        return Vec::new();
    }
    let halvings = (norm * grid.quantum / TAYLOR_NORM).log2().ceil().max(0.0) as i32;
    let mut f = expm1_taylor(&(m * (grid.quantum / 2f64.powi(halvings))));
    let mut square = DMatrix::<f64>::zeros(n, n);
    let mut double = |f: &mut DMatrix<f64>| {
        square_fed(f, nx, &mut square);
        for (v, s) in f.as_mut_slice().iter_mut().zip(square.as_slice()) {
            *v = 2.0 * *v + s;
        }
    };
    for _ in 0..halvings {
        double(&mut f);
    }
    let mut out = Vec::with_capacity(count);
    for p in 0..count {
        if p > 0 {
            double(&mut f);
        }
        out.push(f.clone());
    }
    out
}

/// out = A² for an A whose rows past `nx` are zero in the first `nx` columns (no state
/// feeds the inputs): the columns of x need A's columns of x only. The same sums in
/// the same order as the full product without its terms that are exactly zero.
fn square_fed(a: &DMatrix<f64>, nx: usize, out: &mut DMatrix<f64>) {
    use crate::kernel::{times_fed, Operand};
    let n = a.nrows();
    let s = a.as_slice();
    let all = Operand {
        a: s,
        lda: n,
        rows: n,
        inner: n,
    };
    times_fed(all, n, s, nx, out.as_mut_slice(), n);
}

/// ‖A‖₁, the largest column sum of magnitudes: the bound on how fast any mode of A
/// moves that the Taylor and doubling steps here are sized by.
pub(crate) fn one_norm(a: &DMatrix<f64>) -> f64 {
    a.column_iter().map(|c| c.abs().sum()).fold(0.0, f64::max)
}

/// Ticks within which no mode of M has moved through its first time constant:
/// ‖M‖₁·h ≤ 1 for steps of at most this many ticks (at least one tick).
pub(crate) fn quiet_ticks(m: &DMatrix<f64>, grid: &TimeGrid) -> Tick {
    let ticks = (1.0 / (one_norm(m) * grid.quantum)).floor();
    if ticks.is_finite() {
        (ticks as Tick).clamp(1, 1 << grid.levels)
    } else {
        1 << grid.levels
    }
}

/// exp(A) − I for ‖A‖₁ ≤ [`TAYLOR_NORM`], by the Taylor polynomial of the least degree
/// K whose remainder bound ‖A‖^{K+1}/(K+1)!·e^{‖A‖} is below unit round-off relative to
/// ‖A‖, in Horner form without the identity: A(I + A/2(I + A/3(… (I + A/K)))).
fn expm1_taylor(a: &DMatrix<f64>) -> DMatrix<f64> {
    let norm = one_norm(a);
    let unit = f64::EPSILON / 2.0;
    let (mut degree, mut remainder) = (1u32, norm / 2.0);
    while remainder * norm.exp() > unit && degree < 30 {
        degree += 1;
        remainder *= norm / f64::from(degree + 1);
    }
    let n = a.nrows();
    let identity = DMatrix::<f64>::identity(n, n);
    let mut p = identity.clone();
    let mut ap = DMatrix::<f64>::zeros(n, n);
    for i in (2..=degree).rev() {
        crate::kernel::matmul(a.as_slice(), n, p.as_slice(), n, ap.as_mut_slice(), n);
        p = &identity + &ap / f64::from(i);
    }
    crate::kernel::matmul(a.as_slice(), n, p.as_slice(), n, ap.as_mut_slice(), n);
    ap
}

/// Largest ‖A‖₁ of the Taylor step that starts the rungs (degree 10 at most).
const TAYLOR_NORM: f64 = 0.125;

/// θ₁₃ of Higham (2005), Table 2.3: the largest ‖A‖₁ at which the [13/13] Padé
/// approximant of exp(A) is accurate to unit round-off without scaling.
const THETA_13: f64 = 5.371_920_351_148_152;

/// ∫₀ʰ Φ(s)·X·Φ(s)ᵀ ds for h one tick, Φ(s) = exp(M s), X symmetric. On a sub-tick
/// h₀ = q/2^s with ‖M‖₁·h₀ ≤ [`TAYLOR_NORM`] by its Taylor series: the integrand's k-th
/// derivative at 0 is T_k = M·T_{k−1} + T_{k−1}·Mᵀ, T₀ = X (d/ds Φ X Φᵀ = M Φ X Φᵀ +
/// Φ X Φᵀ Mᵀ), so L(h₀, X) = Σ_k h₀^{k+1}/(k+1)!·T_k, one product per term with
/// ‖T_k‖ ≤ (2‖M‖₁)^k ‖X‖: [`LYAPUNOV_TERMS`] terms reach unit round-off. The tick comes
/// from doubling, L(2h, X) = L(h, X + Φ(h)·X·Φ(h)ᵀ), which only multiplies by
/// propagators (the sub-tick ones from the Taylor difference of [`differences`]).
/// The same integral as Van Loan's block exponential (Van Loan, "Computing integrals
/// involving the matrix exponential", IEEE TAC 23 (1978), Theorem 1), which
/// `meters_from_sums_match_van_loan_per_entry` checks, without its 2nz × 2nz
/// exponential at every read of a meter.
pub(crate) fn tick_gramian(m: &DMatrix<f64>, x: &DMatrix<f64>, grid: &TimeGrid) -> DMatrix<f64> {
    let n = m.nrows();
    let norm = one_norm(m);
    let halvings = (norm * grid.quantum / TAYLOR_NORM)
        .log2()
        .ceil()
        .clamp(0.0, 64.0) as i32;
    let h0 = grid.quantum / 2f64.powi(halvings);
    let identity = DMatrix::<f64>::identity(n, n);
    let mut phis: Vec<DMatrix<f64>> = Vec::with_capacity(halvings as usize);
    if halvings > 0 {
        let mut f = expm1_taylor(&(m * h0));
        for i in 0..halvings {
            if i > 0 {
                f = &f * 2.0 + &f * &f;
            }
            phis.push(&f + &identity);
        }
    }
    let mut acc = x.clone();
    for phi in phis.iter().rev() {
        acc = &acc + phi * &acc * phi.transpose();
    }
    lyapunov_taylor(m, &((&acc + acc.transpose()) * 0.5), h0)
}

/// Σ_{k ≤ K} h^{k+1}/(k+1)!·T_k (see [`tick_gramian`]) for a symmetric X and ‖M‖₁·h ≤
/// [`TAYLOR_NORM`]; each T_k is P + Pᵀ with P = M·T_{k−1}, symmetric as the integral is.
fn lyapunov_taylor(m: &DMatrix<f64>, x: &DMatrix<f64>, h: f64) -> DMatrix<f64> {
    let n = m.nrows();
    let mut t = x.clone();
    let mut p = DMatrix::<f64>::zeros(n, n);
    let mut coef = h;
    let mut sum = x * h;
    for k in 1..=LYAPUNOV_TERMS {
        crate::kernel::matmul(m.as_slice(), n, t.as_slice(), n, p.as_mut_slice(), n);
        t = &p + p.transpose();
        coef *= h / f64::from(k + 1);
        sum += &t * coef;
    }
    sum
}

/// Terms of [`lyapunov_taylor`] past the first: the k-th is at most
/// (2·TAYLOR_NORM)^k/(k+1)! of the first, below unit round-off from k = 12.
const LYAPUNOV_TERMS: u32 = 12;

/// Highest rung not longer than 1/8 of the period of the fastest oscillatory mode that
/// decays by less than e^-π per period (|Re λ| < |Im λ| / 2).
pub(crate) fn oscillation_limit(m: &DMatrix<f64>, nx: usize, grid: &TimeGrid) -> u32 {
    if nx == 0 {
        return grid.levels;
    }
    let a = m.view((0, 0), (nx, nx)).into_owned();
    let Some(schur) = nalgebra::Schur::try_new(a, f64::EPSILON, 10_000) else {
        // No eigenvalues: fall back to the finest rung that still moves, one eighth of
        // the longest step; safe, only slower.
        return grid.levels.saturating_sub(3);
    };
    let fastest = schur
        .complex_eigenvalues()
        .iter()
        .filter(|l| l.re.abs() < 0.5 * l.im.abs())
        .map(|l| l.im.abs())
        .fold(0.0, f64::max);
    if fastest == 0.0 {
        return grid.levels;
    }
    let limit = 2.0 * std::f64::consts::PI / fastest / STEPS_PER_OSCILLATION;
    let mut p = grid.levels;
    while p > 0 && grid.rung(p) > limit {
        p -= 1;
    }
    p
}

/// Symmetric quadratic form Σ c (aᵀb + bᵀa)/2 from pairs of rows.
pub fn quadratic_form(
    nz: usize,
    terms: &[(f64, RowDVector<f64>, RowDVector<f64>)],
) -> DMatrix<f64> {
    let mut q = DMatrix::<f64>::zeros(nz, nz);
    for (c, a, b) in terms {
        let ab = a.transpose() * b;
        q += (&ab + ab.transpose()) * (0.5 * c);
    }
    q
}

#[cfg(test)]
mod tests;
