//! Periods simulated and wall time to reach the periodic steady state: shooting against
//! brute-force settling (plain periods) to the same tolerance, for the closed-loop demo
//! (`demo_design()` under `demo_controller()`, 9 states) at low, nominal and high line.
//! Both start from the same point (the averaged model's equilibrium, see
//! `ClosedLoopMap::guess`) with the tolerance of `ShootingOptions::default()` (1e-9
//! relative, 1 nA / 1 nV floors).
//!
//! Brute force is counted two ways: by its own stop rule (the change over one period
//! within tolerance), which stops while still up to 1/(1 − ρ) ≈ 28 tolerances from the
//! fixed point (ρ = 0.964, the largest Floquet multiplier), and until every state is
//! within tolerance of the fixed point shooting found ("reached"), the fair count.
//!
//! Times: "search", both on one run whose topologies are already built (like with like:
//! the cost of each method's own work); "setup", building the run and the propagator
//! ladders of the topologies the orbit visits, which both methods pay alike, once per
//! circuit and event grid (measured as a fresh shooting run less its search); "fresh",
//! setup plus search, each method on a freshly built run. Propagator ladders are shared
//! process-wide between runs of bit-equal topologies, so "fresh" is measured twice:
//! "cold", the table emptied before each run (a first run of a circuit in a process),
//! and "warm", a new run whose topologies an earlier run built (each point of an
//! efficiency sweep after the first at one line voltage, a study's later cases). A
//! fresh run's clock covers building the map and reaching the steady state; emptying
//! the table before and dropping the map after are left out (a process that has its
//! answer exits without either).
//!
//! Run: `cargo bench -p stepflux-models --bench steady_state`. A plain bench (no
//! criterion): the best of five runs of each.

use std::time::{Duration, Instant};

use stepflux_engine::clear_shared_ladders;
use stepflux_models::demo_design::{demo_controller, demo_design};
use stepflux_models::steady::map::{trial_options, ClosedLoopMap, PeriodMap};
use stepflux_models::steady::{brute, shoot, Counter, ShootingOptions};

const REPEATS: usize = 5;

/// The binary's allocator, so the setup's allocations cost what they cost in `stepflux`.
#[global_allocator]
static ALLOCATOR: mimalloc::MiMalloc = mimalloc::MiMalloc;

fn map(vin: f64) -> ClosedLoopMap {
    let mut d = demo_design();
    d.input.voltage = vin;
    let spec = demo_controller();
    ClosedLoopMap::new(&d, &spec, trial_options(spec.clock_period())).expect("demo builds")
}

/// Best wall time of REPEATS runs of `f`, and the periods its last run took.
fn best(mut f: impl FnMut() -> Counter) -> (Duration, Counter) {
    best_fresh(|| {}, || (f(), ()))
}

/// As [`best`] for a run on a map `f` builds: `before` (emptying the ladder table) runs
/// untimed before each, and what `f` hands back (the map) is dropped after the clock
/// stops, as a process that reached its answer exits without tidying up.
fn best_fresh<T>(
    mut before: impl FnMut(),
    mut f: impl FnMut() -> (Counter, T),
) -> (Duration, Counter) {
    let mut best = Duration::MAX;
    let mut work = Counter::default();
    for _ in 0..REPEATS {
        before();
        let t = Instant::now();
        let (w, keep) = f();
        best = best.min(t.elapsed());
        drop(keep);
        work = w;
    }
    (best, work)
}

/// A fresh map at `vin` and the result of `run` on it.
fn on_new_map(vin: f64, run: impl Fn(&mut ClosedLoopMap) -> Counter) -> (Counter, ClosedLoopMap) {
    let mut m = map(vin);
    (run(&mut m), m)
}

fn shoot_on(m: &mut ClosedLoopMap) -> Counter {
    shoot(m, &ShootingOptions::default())
        .expect("demo has a steady state")
        .work
}

fn brute_stop_rule(m: &mut ClosedLoopMap) -> Counter {
    let start = m.guess();
    let tol = ShootingOptions::default().tolerance;
    let s = brute::settle(m, start, &tol, 100_000).expect("runs");
    assert!(s.norm <= 1.0, "brute force settled");
    s.work
}

fn brute_reached(m: &mut ClosedLoopMap, target: &[f64]) -> Counter {
    let start = m.guess();
    let tol = ShootingOptions::default().tolerance;
    let s = brute::settle_to(m, start, target, &tol, 100_000).expect("runs");
    assert!(s.norm <= 1.0, "brute force reached the fixed point");
    s.work
}

fn ms(d: Duration) -> f64 {
    d.as_secs_f64() * 1e3
}

fn main() {
    println!(
        "{:>5} | {:>5} {:>9} {:>7} {:>6} | {:>8} {:>8} {:>6} | {:>7} | {:>8} {:>8} {:>5} | {:>8} {:>8} {:>5}",
        "line",
        "shoot",
        "brute/rule",
        "reached",
        "ratio",
        "search s",
        "search b",
        "ratio",
        "setup",
        "fresh s",
        "fresh b",
        "ratio",
        "warm s",
        "warm b",
        "ratio"
    );
    for vin in [18.0, 24.0, 36.0] {
        let mut warm = map(vin);
        let target = shoot(&mut warm, &ShootingOptions::default())
            .expect("demo has a steady state")
            .x;
        let rule = brute_stop_rule(&mut warm);
        let reached = brute_reached(&mut warm, &target);
        let (search_s, ws) = best(|| shoot_on(&mut warm));
        let (search_b, _) = best(|| brute_reached(&mut warm, &target));
        let (warm_s, _) = best_fresh(|| {}, || on_new_map(vin, shoot_on));
        let (warm_b, _) = best_fresh(|| {}, || on_new_map(vin, |m| brute_reached(m, &target)));
        let (fresh_s, _) = best_fresh(clear_shared_ladders, || on_new_map(vin, shoot_on));
        let (fresh_b, _) = best_fresh(clear_shared_ladders, || {
            on_new_map(vin, |m| brute_reached(m, &target))
        });
        let setup = fresh_s.saturating_sub(search_s);
        println!(
            "{:>3} V | {:>5} {:>9} {:>7} {:>5.1}× | {:>5.2} ms {:>5.2} ms {:>5.1}× | {:>4.1} ms | {:>5.1} ms {:>5.1} ms {:>4.1}× | {:>5.2} ms {:>5.2} ms {:>4.1}×",
            vin,
            ws.periods,
            rule.periods,
            reached.periods,
            reached.periods as f64 / ws.periods as f64,
            ms(search_s),
            ms(search_b),
            ms(search_b) / ms(search_s),
            ms(setup),
            ms(fresh_s),
            ms(fresh_b),
            ms(fresh_b) / ms(fresh_s),
            ms(warm_s),
            ms(warm_b),
            ms(warm_b) / ms(warm_s),
        );
    }
}
