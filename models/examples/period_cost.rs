//! Cost per switching period of the closed-loop demo on the exact path, without the
//! benchmark harness, for profilers: settles 900 periods, then runs N more (first
//! argument, default 3000) and prints the wall time per period.
//!
//! Instructions per period, repeatable on a shared machine (the difference of two runs
//! removes the settling):
//!
//! ```text
//! valgrind --tool=callgrind target/release/examples/period_cost 1000
//! valgrind --tool=callgrind target/release/examples/period_cost 3000
//! ```
//!
//! (collected instructions of the second minus the first, over 2000).

use std::time::Instant;

use stepflux_engine::NullSink;
use stepflux_models::controller::modulator::ClosedLoop;
use stepflux_models::cycles::{CycleRecord, CycleSink};
use stepflux_models::demo_design::{demo_controller, demo_design};

struct NoCycles;

impl CycleSink for NoCycles {
    fn cycle(&mut self, _: &CycleRecord) {}
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let periods: u32 = std::env::args().nth(1).map_or(Ok(3000), |a| a.parse())?;
    let spec = demo_controller();
    let period = spec.clock_period();
    let mut cl = ClosedLoop::new(
        &demo_design(),
        &spec,
        &[],
        ClosedLoop::default_options(&spec),
    )?;
    let settle = 900.0 * period;
    cl.advance_to(settle, &mut NullSink, &mut NoCycles)?;
    let start = Instant::now();
    cl.advance_to(
        settle + f64::from(periods) * period,
        &mut NullSink,
        &mut NoCycles,
    )?;
    let each = start.elapsed().as_secs_f64() / f64::from(periods);
    println!(
        "{:.2} µs per switching period over {periods} periods",
        each * 1e6
    );
    Ok(())
}
