//! Cost per switching period of the exact path: the demo converter under its demo
//! controller (`demo_design()`, `demo_controller()`; 16 entries in z), no waveform
//! output (NullSink), no meters. The run is settled for 900 periods (6 ms, past both soft
//! starts) before timing; each measured iteration then continues it by 2,000 periods, so
//! the figure is the steady per-period cost: clock, gate delay, blanking, comparator
//! event, turn-off, reset and rectifier events, plain steps in between.
//!
//! A second figure is the cost of one start-up case from cold: build the converter and
//! controller, then 5 ms (the corners study's start-up window), every topology built
//! on the way (no meters, no output; the process-wide table of propagator ladders
//! emptied before each case). It is what each case of a study pays before its
//! measurements. A third is the same case with the table warm: what a case pays whose
//! topologies an earlier case of the same circuit built (a corners study's cases that
//! differ in line voltage only, a second run of one circuit).
//!
//! `cargo bench -p stepflux-models --bench closed_loop`

use std::hint::black_box;
use std::time::{Duration, Instant};

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use stepflux_engine::{clear_shared_ladders, NullSink};
use stepflux_models::controller::modulator::ClosedLoop;
use stepflux_models::cycles::{CycleRecord, CycleSink};
use stepflux_models::demo_design::{demo_controller, demo_design};

const SETTLE_PERIODS: f64 = 900.0;
const PERIODS: u64 = 2_000;

/// Drops cycle records.
struct NoCycles;

impl CycleSink for NoCycles {
    fn cycle(&mut self, _: &CycleRecord) {}
}

fn bench(c: &mut Criterion) {
    let spec = demo_controller();
    let period = spec.clock_period();
    let options = ClosedLoop::default_options(&spec);
    let mut cl = ClosedLoop::new(&demo_design(), &spec, &[], options).expect("demo builds");
    let mut t = SETTLE_PERIODS * period;
    cl.advance_to(t, &mut NullSink, &mut NoCycles)
        .expect("demo settles");
    let mut group = c.benchmark_group("closed_loop_demo");
    group.sample_size(10);
    group.warm_up_time(Duration::from_secs(1));
    group.measurement_time(Duration::from_secs(5));
    group.throughput(Throughput::Elements(PERIODS));
    let (mut total, mut periods) = (Duration::ZERO, 0u64);
    group.bench_function("2k_periods", |b| {
        b.iter_custom(|iters| {
            let start = Instant::now();
            for _ in 0..iters {
                t += PERIODS as f64 * period;
                cl.advance_to(t, &mut NullSink, &mut NoCycles)
                    .expect("demo runs");
            }
            let elapsed = start.elapsed();
            black_box(cl.run.probe("out.v"));
            total += elapsed;
            periods += iters * PERIODS;
            elapsed
        })
    });
    group.finish();
    if periods > 0 {
        eprintln!(
            "closed_loop_demo: {:.2} µs per switching period (mean over {periods} periods, \
             out.v = {:.4} V)",
            total.as_secs_f64() * 1e6 / periods as f64,
            cl.run.probe("out.v").unwrap_or(f64::NAN)
        );
    }
}

/// Simulated time of one start-up case, seconds (as the corners study).
const START_UP: f64 = 5e-3;

fn start_up(c: &mut Criterion) {
    for cold in [true, false] {
        start_up_case(c, cold);
    }
}

/// One 5 ms start-up case per iteration, the ladder table emptied first when `cold`.
fn start_up_case(c: &mut Criterion, cold: bool) {
    let (design, spec) = (demo_design(), demo_controller());
    let options = ClosedLoop::default_options(&spec);
    let mut group = c.benchmark_group("closed_loop_demo");
    group.sample_size(10);
    group.warm_up_time(Duration::from_secs(1));
    group.measurement_time(Duration::from_secs(5));
    let (mut total, mut cases) = (Duration::ZERO, 0u64);
    let name = if cold {
        "start_up_5ms"
    } else {
        "start_up_5ms_table_warm"
    };
    group.bench_function(name, |b| {
        b.iter_custom(|iters| {
            let mut elapsed = Duration::ZERO;
            for _ in 0..iters {
                if cold {
                    clear_shared_ladders();
                }
                let start = Instant::now();
                let mut cl = ClosedLoop::new(&design, &spec, &[], options).expect("demo builds");
                cl.advance_to(START_UP, &mut NullSink, &mut NoCycles)
                    .expect("demo starts");
                black_box(cl.run.probe("out.v"));
                elapsed += start.elapsed();
            }
            total += elapsed;
            cases += iters;
            elapsed
        })
    });
    group.finish();
    if cases > 0 {
        let how = if cold {
            "from cold"
        } else {
            "ladder table warm"
        };
        eprintln!(
            "closed_loop_demo: {:.2} ms per 5 ms start-up case, {how} (mean over {cases})",
            total.as_secs_f64() * 1e3 / cases as f64
        );
    }
}

criterion_group!(benches, bench, start_up);
criterion_main!(benches);
