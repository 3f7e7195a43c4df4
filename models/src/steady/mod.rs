//! Periodic steady state by shooting.
//!
//! **Method.** The steady state of a converter switching with period T is a fixed point
//! of the period map P, x(t₀ + T) = P(x(t₀)), over every dynamic state — power stage,
//! controller amplifiers and compensation alike, since they are ordinary engine states.
//! It is found by Newton's method on F(x) = P(x) − x (Aprille & Trick, "Steady-state
//! analysis of nonlinear circuits with periodic inputs", Proc. IEEE 60(1), 1972):
//! (I − J) Δ = P(x) − x, x ← x + λΔ. In alternating mode T is two clock periods (one
//! period of each output); open loop, one gate period.
//!
//! **Jacobian.** J = ∂P/∂x is the monodromy matrix of the period, carried along the
//! trial run itself by the engine ([`stepflux_engine::Simulation::track_sensitivity`]):
//! the product of the state part Φ_xx = e^{A·τ} of each step's cached propagator with a
//! saltation matrix S = I + (f⁺ − f⁻)·∇gᵀ / (∇g·f⁻ + ∂g/∂t) at each switching instant
//! that moves with the state (Aprille & Trick §III; Leine & Nijmeijer, "Dynamics and
//! Bifurcations of Non-smooth Mechanical Systems", Springer 2004, §3.5): g the event
//! function that crossed (a diode's switching function, the magnetising current at the
//! saturation knee, the control voltage against the falling ramp, whose rate is
//! ∂g/∂t), f∓ the vector fields before and after. Clock edges, the duty clamp, dead
//! times after the clock and source breakpoints are scheduled (S = I); the comparator's
//! turn-off a gate delay after its crossing (and the auxiliary switch a dead time
//! later) is tied to that crossing (`modulator.rs`, [`stepflux_engine::Simulation::delay_from`]),
//! so its saltation uses the crossing's time sensitivity; a diode settling cascade at
//! one instant is one update from the first field to the last, which equals the
//! product of the stagewise saltations in order. J comes with P(x) from the same run
//! for one nx × nx product per step, so each Newton iteration costs one period, and J
//! is exact up to the one-tick location of each instant. Newton then converges
//! quadratically (the tests check the order and the constant on the demo): from the
//! averaged start the closed-loop demo takes 7 periods (3 plain, 4 Newton), against 17
//! with the forward-difference Jacobian and Broyden updates used before.
//!
//! **Fallback.** A map that cannot give J (the trait's default, a test map) or a run
//! that meets an instant it cannot account for (two crossings within one tick, a grazing
//! crossing) gets J by forward differences, nx + 1 period runs, column j from a run with
//! x_j raised by h_j = 10⁻⁶·max(|x_j|, 1 unit), then carried along by Broyden's update
//! while full steps reduce the residual. Its error, of order h·|P''| plus the event
//! quantisation (a switching instant is located to one tick, so P is a staircase of
//! 1e-12·T steps in duty with [`map::trial_options`]; h shifts a crossing by hundreds of
//! ticks), makes that convergence only superlinear; the tests also use it, as central
//! differences, to check the exact J.
//!
//! **Convergence** is judged per state: |P(x)_i − x_i| ≤ rtol·|x_i| + atol(kind) with
//! floors per kind (current, voltage, block state), and the Newton correction, which
//! estimates the remaining error, within the same bound — a residual alone understates
//! the error along a slowly decaying mode (the amplifier macromodels' 100 Hz poles).
//! A step is halved up to [`ShootingOptions::line_search`] times until the residual
//! falls. [`ShootingOptions::warmup_periods`] plain periods come first. If Newton
//! stalls, [`ShootingOptions::fallback_periods`] plain periods move
//! the point towards the attractor and Newton is retried, up to
//! [`ShootingOptions::retries`] times; then the search fails with the residual and the
//! names of the states that do not converge.
//!
//! **Subharmonics.** Newton also converges to an unstable periodic orbit, which the
//! converter would leave. So the Floquet multipliers (eigenvalues of J at the fixed
//! point) are checked: spectral radius above 1 means the period-1 orbit is unstable.
//! Then, and when Newton on P fails, the search runs plain periods towards the
//! attractor and shoots on P²: a stable fixed point of P² that is not one of P is
//! reported as period-2 operation ([`SteadyError::Subharmonic`]), otherwise as no
//! periodic steady state (possibly chaotic), never as a wrong steady state.

pub mod brute;
pub mod map;
pub mod names;
mod newton;

use thiserror::Error;

use crate::error::ModelError;
use map::PeriodMap;
use names::StateName;
use newton::{spectral_radius, Iterate, Outcome, Solver};

/// Steady-state tolerance: relative, with an absolute floor per kind of state.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Tolerance {
    /// Relative part.
    pub relative: f64,
    /// Floor for inductor currents, amperes.
    pub current: f64,
    /// Floor for capacitor voltages, volts.
    pub voltage: f64,
    /// Floor for block states (units of the block).
    pub block: f64,
}

impl Default for Tolerance {
    /// 1e-9 relative, 1 nA and 1 nV floors: three orders below the 1e-6 the results are
    /// compared at, and above the 5 nA one event tick moves the demo's output inductor
    /// current by on the trial grid.
    fn default() -> Self {
        Tolerance {
            relative: 1e-9,
            current: 1e-9,
            voltage: 1e-9,
            block: 1e-9,
        }
    }
}

/// Settings of the search.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ShootingOptions {
    /// When to stop.
    pub tolerance: Tolerance,
    /// Relative finite-difference perturbation of the fallback Jacobian (used only
    /// where the exact one is unavailable).
    pub perturbation: f64,
    /// Jacobians formed per attempt (one per Newton iteration with the exact one).
    pub max_newton: usize,
    /// Step halvings tried per iteration.
    pub line_search: usize,
    /// Plain periods run before the first Newton iteration.
    pub warmup_periods: usize,
    /// Plain periods run before a retry.
    pub fallback_periods: usize,
    /// Retries after a stall.
    pub retries: usize,
}

impl Default for ShootingOptions {
    /// 1e-6 perturbation (about the square root of the tick staircase's relative size
    /// on the trial grid, the usual choice for a forward difference); 3 plain periods
    /// first (from the averaged equilibrium the first period crosses the duty clamp and
    /// the amplifier rails, where the linearisation says little about the next steps:
    /// with the exact Jacobian the demo takes 20 / 5 / 6 / 7 periods after 0 / 1 / 2 / 3
    /// plain ones, but after 1 its DCM case's first Newton step lands in an event storm,
    /// measured); 12 Jacobians per attempt, 4 halvings, 10 plain periods and 3 retries.
    fn default() -> Self {
        ShootingOptions {
            tolerance: Tolerance::default(),
            perturbation: 1e-6,
            max_newton: 12,
            line_search: 4,
            warmup_periods: 3,
            fallback_periods: 10,
            retries: 3,
        }
    }
}

/// Work done so far.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Counter {
    /// Map periods simulated (each clock period of an alternating output counts as
    /// half).
    pub periods: usize,
    /// Newton Jacobians formed: exact ones (from the trial period's own run, no extra
    /// periods) and difference ones.
    pub newton: usize,
    /// Of those, difference Jacobians (nx periods each), formed only where the exact
    /// one is unavailable.
    pub differences: usize,
}

/// A converged periodic steady state.
#[derive(Clone, Debug, PartialEq)]
pub struct SteadyState {
    /// Name, kind and unit of each state.
    pub names: Vec<StateName>,
    /// The states at the period boundary.
    pub x: Vec<f64>,
    /// Weighted residual norm (≤ 1: within tolerance) of each accepted iterate.
    pub history: Vec<f64>,
    /// Largest Floquet multiplier modulus (< 1: a stable orbit).
    pub spectral_radius: f64,
    /// Work done.
    pub work: Counter,
    /// Map period, seconds.
    pub period: f64,
}

impl SteadyState {
    /// The value of a state by name.
    pub fn get(&self, name: &str) -> Option<f64> {
        self.names
            .iter()
            .position(|n| n.name == name)
            .map(|k| self.x[k])
    }

    /// (name, value) of every state.
    pub fn named(&self) -> Vec<(String, f64)> {
        self.names
            .iter()
            .zip(&self.x)
            .map(|(n, &v)| (n.name.clone(), v))
            .collect()
    }
}

/// Why no steady state was found.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum SteadyError {
    /// Running the converter failed.
    #[error(transparent)]
    Model(#[from] ModelError),
    /// Newton did not converge, even after plain periods.
    #[error(
        "no periodic steady state after {periods} periods: residual {residual:.3e} times \
         the tolerance; not converging: {}", states.join(", ")
    )]
    NotConverged {
        /// Weighted residual norm at the best point.
        residual: f64,
        /// States above tolerance.
        states: Vec<String>,
        /// Periods simulated.
        periods: usize,
        /// Largest Floquet multiplier modulus of the period-1 orbit, if one was found
        /// (above 1: unstable, the converter leaves it).
        spectral_radius: Option<f64>,
    },
    /// The converter settles into an orbit of `order` periods, not one.
    #[error(
        "subharmonic operation: the converter repeats every {order} periods, not every \
         period; states that differ between periods: {}", states.join(", ")
    )]
    Subharmonic {
        /// Periods per repetition.
        order: usize,
        /// States differing between the periods of the orbit.
        states: Vec<String>,
        /// The orbit's states at each of its period boundaries.
        orbit: Vec<Vec<f64>>,
    },
}

/// Relative push off an unstable period-1 orbit before looking for the attractor.
const KICK: f64 = 1e-3;
/// Plain periods from the push to the attractor: an orbit is left at the rate of its
/// multiplier, and 200 periods take a 1e-3 push on a multiplier of 1.05 to order one.
const ATTRACTOR_PERIODS: usize = 200;

/// Multipliers this close above 1 are taken as the error of a fallback difference
/// Jacobian, not as instability (the exact one is far closer).
const STABILITY_MARGIN: f64 = 1e-2;

/// Finds the periodic steady state of `map` from its [`PeriodMap::guess`].
pub fn shoot<M: PeriodMap>(
    map: &mut M,
    opts: &ShootingOptions,
) -> Result<SteadyState, SteadyError> {
    let start = map.guess();
    shoot_from(map, start, opts)
}

/// Finds the periodic steady state of `map` starting from `x0`.
pub fn shoot_from<M: PeriodMap>(
    map: &mut M,
    x0: Vec<f64>,
    opts: &ShootingOptions,
) -> Result<SteadyState, SteadyError> {
    let mut count = Counter::default();
    let mut history = Vec::new();
    let found = solve_power(map, x0, opts, &mut count, &mut history, 1)?;
    match found {
        Found::Orbit(it, jac) => {
            let rho = spectral_radius(&jac);
            if rho <= 1.0 + STABILITY_MARGIN {
                return Ok(SteadyState {
                    names: map.names().to_vec(),
                    x: it.x,
                    history,
                    spectral_radius: rho,
                    work: count,
                    period: map.period(),
                });
            }
            Err(period_two(map, it.x, opts, &mut count, Some(rho))?)
        }
        Found::Stalled(best) => Err(period_two(map, best.x, opts, &mut count, None)?),
    }
}

enum Found {
    Orbit(Iterate, nalgebra::DMatrix<f64>),
    Stalled(Iterate),
}

/// Newton on Pᵐ with the fallback of plain periods between attempts.
fn solve_power<M: PeriodMap>(
    map: &mut M,
    x0: Vec<f64>,
    opts: &ShootingOptions,
    count: &mut Counter,
    history: &mut Vec<f64>,
    power: usize,
) -> Result<Found, ModelError> {
    let mut solver = Solver {
        map,
        opts,
        count,
        power,
    };
    let x0 = match opts.warmup_periods {
        0 => x0,
        n => plain_periods(solver.map, &x0, n, solver.count)?,
    };
    let mut it = solver.evaluate(x0)?;
    let mut attempt = 0;
    loop {
        match solver.solve(it, history)? {
            Outcome::Converged(it, jac) => return Ok(Found::Orbit(it, jac)),
            Outcome::Stalled(best) if attempt == opts.retries => return Ok(Found::Stalled(best)),
            Outcome::Stalled(best) => {
                let x = plain_periods(solver.map, &best.x, opts.fallback_periods, solver.count)?;
                it = solver.evaluate(x)?;
                attempt += 1;
            }
        }
    }
}

/// `n` plain periods from `x`.
fn plain_periods<M: PeriodMap>(
    map: &mut M,
    x: &[f64],
    n: usize,
    count: &mut Counter,
) -> Result<Vec<f64>, ModelError> {
    count.periods += n;
    map.run_from(x, n, &mut map::Discard)
}

/// After period 1 failed or is unstable: a stable fixed point of P² that is not one of
/// P is period-2 operation; anything else is no periodic steady state.
fn period_two<M: PeriodMap>(
    map: &mut M,
    near: Vec<f64>,
    opts: &ShootingOptions,
    count: &mut Counter,
    rho1: Option<f64>,
) -> Result<SteadyError, ModelError> {
    // Leave the (possibly unstable) period-1 orbit towards the attractor.
    let mut kick = near.clone();
    for (k, n) in map.names().iter().enumerate() {
        kick[k] += KICK * near[k].abs().max(newton::typical(n.class));
    }
    let x = plain_periods(map, &kick, ATTRACTOR_PERIODS, count)?;
    let mut history = Vec::new();
    if let Found::Orbit(it, jac) = solve_power(map, x, opts, count, &mut history, 2)? {
        let x1 = map.apply(&it.x)?;
        count.periods += 1;
        let r: Vec<f64> = x1.iter().zip(&it.x).map(|(a, b)| a - b).collect();
        let differ = opts.tolerance.offenders(map.names(), &it.x, &r);
        if spectral_radius(&jac) <= 1.0 + STABILITY_MARGIN && !differ.is_empty() {
            return Ok(SteadyError::Subharmonic {
                order: 2,
                states: differ,
                orbit: vec![it.x, x1],
            });
        }
    }
    let fx = map.apply(&near)?;
    count.periods += 1;
    let r: Vec<f64> = fx.iter().zip(&near).map(|(a, b)| a - b).collect();
    let tol = &opts.tolerance;
    Ok(SteadyError::NotConverged {
        residual: tol.norm(map.names(), &near, &r),
        states: match tol.offenders(map.names(), &near, &r) {
            v if v.is_empty() => map.names().iter().map(|n| n.name.clone()).collect(),
            v => v,
        },
        periods: count.periods,
        spectral_radius: rho1,
    })
}
