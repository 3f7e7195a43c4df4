//! Periods simulated and wall time to reach the periodic steady state: shooting
//! against brute-force settling (plain periods until the change per period is within
//! the same tolerance), for the closed-loop demo (`demo_design()` under
//! `demo_controller()`) at low, nominal and high line. Both start from the same point
//! (the averaged model's equilibrium, see `ClosedLoopMap::guess`). Brute force stops on
//! the change per period, which understates its distance to the fixed point by
//! 1/(1 − ρ) (about 28 here): the comparison favours brute force.
//!
//! Two timings: "cold", each method on a freshly built run, so each pays for building
//! the propagators of the topologies it visits (on the trial grid, ~5 ms each; the
//! shooting trials visit more of them); "warm", both on one run whose topologies are
//! already built (by a first search), which is the cost of the search itself and what
//! a sweep over operating points of one circuit mostly pays.
//!
//! Run: `cargo bench -p stepflux-models --bench steady_state`. A plain bench (no
//! criterion): a search takes 3–150 ms, so the best of five runs is reported.

use std::time::{Duration, Instant};

use stepflux_models::demo_design::{demo_controller, demo_design};
use stepflux_models::steady::map::{trial_options, ClosedLoopMap, PeriodMap};
use stepflux_models::steady::{brute, shoot, Counter, ShootingOptions};

const REPEATS: usize = 5;

fn map(vin: f64) -> ClosedLoopMap {
    let mut d = demo_design();
    d.input.voltage = vin;
    let spec = demo_controller();
    ClosedLoopMap::new(&d, &spec, trial_options(spec.clock_period())).expect("demo builds")
}

/// Best wall time of REPEATS runs of `f`, and the periods its last run took.
fn best(mut f: impl FnMut() -> Counter) -> (Duration, Counter) {
    let mut best = Duration::MAX;
    let mut work = Counter::default();
    for _ in 0..REPEATS {
        let t = Instant::now();
        work = f();
        best = best.min(t.elapsed());
    }
    (best, work)
}

fn shoot_on(m: &mut ClosedLoopMap) -> Counter {
    shoot(m, &ShootingOptions::default())
        .expect("demo has a steady state")
        .work
}

fn brute_on(m: &mut ClosedLoopMap) -> Counter {
    let start = m.guess();
    let tol = ShootingOptions::default().tolerance;
    let s = brute::settle(m, start, &tol, 100_000).expect("runs");
    assert!(s.norm <= 1.0, "brute force settled");
    s.work
}

fn ms(d: Duration) -> f64 {
    d.as_secs_f64() * 1e3
}

fn main() {
    println!(
        "{:>5} {:>7} {:>7} {:>6} | {:>10} {:>10} {:>6} | {:>10} {:>10} {:>6}",
        "line",
        "shoot",
        "brute",
        "ratio",
        "cold shoot",
        "cold brute",
        "ratio",
        "warm shoot",
        "warm brute",
        "ratio"
    );
    for vin in [18.0, 24.0, 36.0] {
        let (cold_s, ws) = best(|| shoot_on(&mut map(vin)));
        let (cold_b, wb) = best(|| brute_on(&mut map(vin)));
        let mut warm = map(vin);
        shoot_on(&mut warm);
        brute_on(&mut warm);
        let (warm_s, _) = best(|| shoot_on(&mut warm));
        let (warm_b, _) = best(|| brute_on(&mut warm));
        println!(
            "{:>3} V {:>7} {:>7} {:>5.1}× | {:>7.1} ms {:>7.1} ms {:>5.1}× | {:>7.2} ms {:>7.2} ms {:>5.1}×",
            vin,
            ws.periods,
            wb.periods,
            wb.periods as f64 / ws.periods as f64,
            ms(cold_s),
            ms(cold_b),
            ms(cold_b) / ms(cold_s),
            ms(warm_s),
            ms(warm_b),
            ms(warm_b) / ms(warm_s),
        );
    }
}
