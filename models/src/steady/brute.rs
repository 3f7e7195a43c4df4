//! Brute-force settling: plain periods until the period-to-period change of every state
//! is within tolerance. The reference the shooting method is checked and benchmarked
//! against.

use super::map::PeriodMap;
use super::{Counter, Tolerance};
use crate::error::ModelError;

/// Where plain periods stopped.
#[derive(Clone, Debug, PartialEq)]
pub struct Settled {
    /// The states at the last period boundary.
    pub x: Vec<f64>,
    /// Weighted norm of the last period's change (≤ 1: within tolerance).
    pub norm: f64,
    /// Periods run.
    pub work: Counter,
}

/// Runs plain periods from `x0` until |x_{k+1} − x_k| is within `tol` on every state
/// or `max_periods` have run. The change per period understates the distance to the
/// fixed point by the factor 1/(1 − ρ) of the slowest mode, which is why the shooting
/// test also asks for its Newton correction to be small; for comparisons this makes
/// brute force stop early, never late.
pub fn settle<M: PeriodMap>(
    map: &mut M,
    x0: Vec<f64>,
    tol: &Tolerance,
    max_periods: usize,
) -> Result<Settled, ModelError> {
    let mut x = x0;
    let mut work = Counter::default();
    let mut norm = f64::INFINITY;
    while work.periods < max_periods {
        let next = map.apply(&x)?;
        work.periods += 1;
        let r: Vec<f64> = next.iter().zip(&x).map(|(a, b)| a - b).collect();
        norm = tol.norm(map.names(), &x, &r);
        x = next;
        if norm <= 1.0 {
            break;
        }
    }
    Ok(Settled { x, norm, work })
}

/// Runs plain periods from `x0` until every state is within `tol` of `target` (a fixed
/// point found otherwise, e.g. by shooting) or `max_periods` have run: the periods
/// brute force needs to be as close to the steady state as the shooting result is.
/// Unlike [`settle`]'s stop rule this cannot stop early on a slow mode, so it is the
/// fair count for comparisons; it needs the answer, so it is for benchmarks and tests.
pub fn settle_to<M: PeriodMap>(
    map: &mut M,
    x0: Vec<f64>,
    target: &[f64],
    tol: &Tolerance,
    max_periods: usize,
) -> Result<Settled, ModelError> {
    let mut x = x0;
    let mut work = Counter::default();
    let distance = |x: &[f64], names: &[super::names::StateName]| {
        let r: Vec<f64> = x.iter().zip(target).map(|(a, b)| a - b).collect();
        tol.norm(names, target, &r)
    };
    let mut norm = distance(&x, map.names());
    while norm > 1.0 && work.periods < max_periods {
        x = map.apply(&x)?;
        work.periods += 1;
        norm = distance(&x, map.names());
    }
    Ok(Settled { x, norm, work })
}
