//! Cost of reaching the periodic steady state of the closed-loop demo from a freshly
//! built run, for profilers: `steady_cost shoot|brute [VIN [REPEATS]]`, the search
//! repeated REPEATS times (default 1) on the same map, so the difference between 2 and
//! 1 is one search on built topologies. Instructions are repeatable where wall time is
//! not:
//!
//! ```text
//! valgrind --tool=callgrind target/release/examples/steady_cost shoot 24
//! valgrind --tool=callgrind target/release/examples/steady_cost shoot 24 2
//! valgrind --tool=callgrind target/release/examples/steady_cost brute 24
//! ```

use stepflux_models::demo_design::{demo_controller, demo_design};
use stepflux_models::steady::map::{trial_options, ClosedLoopMap, PeriodMap};
use stepflux_models::steady::{brute, shoot, ShootingOptions};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let method = std::env::args().nth(1).unwrap_or_else(|| "shoot".into());
    let vin: f64 = std::env::args().nth(2).map_or(Ok(24.0), |a| a.parse())?;
    let repeats: usize = std::env::args().nth(3).map_or(Ok(1), |a| a.parse())?;
    let mut d = demo_design();
    d.input.voltage = vin;
    let spec = demo_controller();
    let mut map = ClosedLoopMap::new(&d, &spec, trial_options(spec.clock_period()))?;
    for _ in 0..repeats {
        let periods = match method.as_str() {
            "brute" => {
                let start = map.guess();
                let tol = ShootingOptions::default().tolerance;
                brute::settle(&mut map, start, &tol, 100_000)?.work.periods
            }
            _ => shoot(&mut map, &ShootingOptions::default())?.work.periods,
        };
        println!("{method} at {vin} V: {periods} periods");
    }
    Ok(())
}
