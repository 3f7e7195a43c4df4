//! Newton's method on x = Pᵐ(x) with the exact Jacobian the engine carries along each
//! trial period (differences and Broyden's update where a map has none) and a halving
//! line search (see the module doc of [`super`] for the method and why).

use nalgebra::{DMatrix, DVector};

use super::map::PeriodMap;
use super::names::{StateClass, StateName};
use super::{Counter, ShootingOptions, Tolerance};
use crate::error::ModelError;

/// Typical magnitude of a state of each class, for sizing perturbations of states that
/// sit near zero (a magnetising current at the clock edge): 1 A, 1 V, 1.
pub(crate) fn typical(class: StateClass) -> f64 {
    match class {
        StateClass::Current | StateClass::Voltage | StateClass::Block => 1.0,
    }
}

impl Tolerance {
    /// The allowed residual of state `class` at value `x`: relative with an absolute
    /// floor per kind.
    pub fn scale(&self, class: StateClass, x: f64) -> f64 {
        let floor = match class {
            StateClass::Current => self.current,
            StateClass::Voltage => self.voltage,
            StateClass::Block => self.block,
        };
        self.relative * x.abs() + floor
    }

    /// max_i |r_i| / scale_i: at most 1 means every state is within tolerance.
    pub fn norm(&self, names: &[StateName], x: &[f64], r: &[f64]) -> f64 {
        names
            .iter()
            .zip(x.iter().zip(r))
            .map(|(n, (&x, &r))| r.abs() / self.scale(n.class, x))
            .fold(0.0, f64::max)
    }

    /// Names of the states whose residual is above tolerance.
    pub fn offenders(&self, names: &[StateName], x: &[f64], r: &[f64]) -> Vec<String> {
        names
            .iter()
            .zip(x.iter().zip(r))
            .filter(|(n, (&x, &r))| r.abs() > self.scale(n.class, x))
            .map(|(n, _)| n.name.clone())
            .collect()
    }
}

/// A point, its image and the residual's weighted norm.
#[derive(Clone, Debug)]
pub(crate) struct Iterate {
    pub x: Vec<f64>,
    pub fx: Vec<f64>,
    pub norm: f64,
    /// ∂Pᵐ/∂x at x, from the same run, when the map gives it.
    pub jac: Option<DMatrix<f64>>,
}

impl Iterate {
    pub fn residual(&self) -> Vec<f64> {
        self.fx.iter().zip(&self.x).map(|(f, x)| f - x).collect()
    }
}

/// How a Newton solve ended.
pub(crate) enum Outcome {
    /// Residual and last correction within tolerance; the Jacobian of Pᵐ at the point.
    Converged(Iterate, DMatrix<f64>),
    /// No step reduced the residual, or the iteration limit was reached: the best
    /// point seen.
    Stalled(Iterate),
}

pub(crate) struct Solver<'a, M: PeriodMap> {
    pub map: &'a mut M,
    pub opts: &'a ShootingOptions,
    pub count: &'a mut Counter,
    /// Map periods per evaluation (m of Pᵐ).
    pub power: usize,
}

impl<M: PeriodMap> Solver<'_, M> {
    /// Pᵐ(x), with its exact Jacobian when the map gives one: a Newton iterate needs
    /// it, and it comes from the same run for one nx × nx product per step.
    pub fn evaluate(&mut self, x: Vec<f64>) -> Result<Iterate, ModelError> {
        let (fx, jac) = self.map.run_with_jacobian(&x, self.power)?;
        self.count.periods += self.power;
        let r: Vec<f64> = fx.iter().zip(&x).map(|(f, x)| f - x).collect();
        let norm = self.opts.tolerance.norm(self.map.names(), &x, &r);
        Ok(Iterate { x, fx, norm, jac })
    }

    /// The Jacobian at `at`: the exact one its run carried, else by differences.
    fn jacobian(&mut self, at: &mut Iterate) -> Result<DMatrix<f64>, ModelError> {
        self.count.newton += 1;
        match at.jac.take() {
            Some(j) => Ok(j),
            None => self.differences(at),
        }
    }

    /// J_ij ≈ (Pᵐ(x + h_j e_j)_i − Pᵐ(x)_i) / h_j, one forward difference per state,
    /// h_j = perturbation · max(|x_j|, typical_j): the fallback for a map or a point
    /// without an exact Jacobian.
    pub fn differences(&mut self, at: &Iterate) -> Result<DMatrix<f64>, ModelError> {
        self.count.differences += 1;
        let n = at.x.len();
        let mut j = DMatrix::zeros(n, n);
        for col in 0..n {
            let class = self.map.names()[col].class;
            let h = self.opts.perturbation * at.x[col].abs().max(typical(class));
            let mut xp = at.x.clone();
            xp[col] += h;
            let fp = self
                .map
                .run_from(&xp, self.power, &mut super::map::Discard)?;
            self.count.periods += self.power;
            for row in 0..n {
                j[(row, col)] = (fp[row] - at.fx[row]) / h;
            }
        }
        Ok(j)
    }

    /// Newton from `start`; the residual norm of each accepted iterate is pushed on
    /// `history`. Each iterate brings its exact Jacobian when the map gives one
    /// (Newton proper: quadratic convergence); otherwise the Jacobian is formed by
    /// differences once, then carried along by Broyden's rank-one update (Broyden, "A
    /// class of methods for solving nonlinear simultaneous equations", Math. Comp. 19,
    /// 1965) while full steps keep reducing the residual, and a step that does not is
    /// retried with a fresh difference Jacobian. A step that fails with a fresh
    /// Jacobian is halved.
    pub fn solve(&mut self, start: Iterate, history: &mut Vec<f64>) -> Result<Outcome, ModelError> {
        let mut it = start;
        history.push(it.norm);
        let before = self.count.newton;
        let mut jac = self.jacobian(&mut it)?;
        let mut fresh = true;
        let mut steps = 0;
        loop {
            let Some(step) = newton_step(&jac, &it) else {
                return Ok(Outcome::Stalled(it));
            };
            let step_norm = self.opts.tolerance.norm(self.map.names(), &it.x, &step);
            if it.norm <= 1.0 && step_norm <= 1.0 {
                // The residual is within tolerance, and so is the Newton correction,
                // which estimates the remaining error (the residual alone understates
                // it along a slowly decaying mode).
                return Ok(Outcome::Converged(it, jac));
            }
            let formed = self.count.newton - before;
            if steps == 4 * self.opts.max_newton || formed > self.opts.max_newton {
                return Ok(Outcome::Stalled(it));
            }
            steps += 1;
            let mut trial = self.evaluate(add(&it.x, &step, 1.0))?;
            if trial.norm < it.norm || trial.norm <= 1.0 {
                fresh = trial.jac.is_some();
                if fresh {
                    jac = self.jacobian(&mut trial)?;
                } else {
                    self.broyden(&mut jac, &it, &trial);
                }
                history.push(trial.norm);
                it = trial;
            } else if !fresh {
                jac = self.differences(&it)?;
                self.count.newton += 1;
                fresh = true;
            } else {
                match self.line_search(&it, &step)? {
                    Some(mut next) => {
                        history.push(next.norm);
                        jac = self.jacobian(&mut next)?;
                        it = next;
                    }
                    None => return Ok(Outcome::Stalled(it)),
                }
            }
        }
    }

    /// Broyden's update J ← J + (y − J s) (D²s)ᵀ / (sᵀD²s), s the step, y the change of
    /// P, in variables scaled by each state's typical size D⁻¹ (the states span volts to
    /// microvolts, and the unscaled update would be ruled by the largest).
    fn broyden(&self, jac: &mut DMatrix<f64>, from: &Iterate, to: &Iterate) {
        let names = self.map.names();
        let n = from.x.len();
        let s = DVector::from_iterator(n, to.x.iter().zip(&from.x).map(|(a, b)| a - b));
        let y = DVector::from_iterator(n, to.fx.iter().zip(&from.fx).map(|(a, b)| a - b));
        let d2 = DVector::from_iterator(
            n,
            names.iter().zip(&from.x).map(|(nm, x)| {
                let t = x.abs().max(typical(nm.class));
                1.0 / (t * t)
            }),
        );
        let ds = s.component_mul(&d2);
        let denom = s.dot(&ds);
        if denom > 0.0 && denom.is_finite() {
            let u = (y - &*jac * &s) / denom;
            *jac += u * ds.transpose();
        }
    }

    /// Half the step first (the full one has failed), halved again up to `line_search`
    /// times until the residual
    /// falls (Armijo-style on the weighted max-norm, without a slope term: the norm is
    /// not smooth).
    fn line_search(&mut self, it: &Iterate, step: &[f64]) -> Result<Option<Iterate>, ModelError> {
        let mut lambda = 0.5;
        for _ in 0..=self.opts.line_search {
            let trial = self.evaluate(add(&it.x, step, lambda))?;
            if trial.norm < it.norm || trial.norm <= 1.0 {
                return Ok(Some(trial));
            }
            lambda *= 0.5;
        }
        Ok(None)
    }
}

fn add(x: &[f64], step: &[f64], lambda: f64) -> Vec<f64> {
    x.iter().zip(step).map(|(x, s)| x + lambda * s).collect()
}

/// The Newton correction Δ of (I − J) Δ = P(x) − x, or None if I − J is singular.
fn newton_step(jac: &DMatrix<f64>, it: &Iterate) -> Option<Vec<f64>> {
    let n = it.x.len();
    let a = DMatrix::identity(n, n) - jac;
    a.lu()
        .solve(&DVector::from_vec(it.residual()))
        .map(|s| s.as_slice().to_vec())
}

/// Largest modulus among the eigenvalues of `j` (the Floquet multipliers of the
/// orbit, when `j` is the Jacobian of the period map at its fixed point).
pub(crate) fn spectral_radius(j: &DMatrix<f64>) -> f64 {
    j.complex_eigenvalues()
        .iter()
        .map(|c| c.norm())
        .fold(0.0, f64::max)
}
