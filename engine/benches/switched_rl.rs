//! Stepping cost of the exact path on the simplest switched circuit: a gate-driven
//! switch from a 12 V source into a series R–L load with a freewheel diode (a buck
//! feeding an RL load), 100 kHz, duty 0.5, continuous conduction. One measured
//! iteration steps 10,000 switching periods with no output (NullSink); the circuit is
//! built and its two topologies cached before timing starts, so the figure is the
//! steady per-period cost: two gate changes, two diode settlings, grid steps.

use std::hint::black_box;
use std::time::{Duration, Instant};

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use stepflux_engine::{
    Circuit, DiodeParams, ElementId, NodeId, NullSink, Observation, Quantity, Signal, SimOptions,
    Simulation, SwitchParams, Waveform,
};

const PERIOD: f64 = 10e-6;
const DUTY: f64 = 0.5;
const PERIODS: u64 = 10_000;

fn switched_rl() -> (Simulation, ElementId) {
    let mut c = Circuit::new();
    let (vin, sw, mid) = (c.node("in"), c.node("sw"), c.node("mid"));
    let g = NodeId::GROUND;
    c.voltage_source("V", vin, g, Waveform::Constant(12.0))
        .unwrap();
    let (r_on, r_off) = (0.01, 1e6);
    let s = c
        .switch("S", vin, sw, SwitchParams { r_on, r_off }, false)
        .unwrap();
    let vf = 0.5;
    c.diode("D", g, sw, DiodeParams { vf, r_on, r_off })
        .unwrap();
    let l = c.inductor("L", sw, mid, 100e-6, 0.0).unwrap();
    c.resistor("R", mid, g, 1.0).unwrap();
    let obs = Observation {
        probes: vec![("i_L".into(), Signal::of(Quantity::Current(l)))],
        ..Default::default()
    };
    let sim = Simulation::new(c, obs, SimOptions::for_period(PERIOD)).unwrap();
    (sim, s)
}

/// Steps periods `first..first + n` (gate on at each period start, off at D·T).
fn run_periods(sim: &mut Simulation, switch: ElementId, first: u64, n: u64) {
    for k in first..first + n {
        let t0 = k as f64 * PERIOD;
        sim.set_gate(switch, true).unwrap();
        sim.advance(t0 + DUTY * PERIOD, &mut NullSink).unwrap();
        sim.set_gate(switch, false).unwrap();
        sim.advance(t0 + PERIOD, &mut NullSink).unwrap();
    }
}

fn bench(c: &mut Criterion) {
    let mut group = c.benchmark_group("switched_rl");
    group.sample_size(10);
    group.warm_up_time(Duration::from_secs(1));
    group.measurement_time(Duration::from_secs(3));
    group.throughput(Throughput::Elements(PERIODS));
    let mut total = Duration::ZERO;
    let mut periods = 0u64;
    group.bench_function("10k_periods", |b| {
        b.iter_custom(|iters| {
            let mut elapsed = Duration::ZERO;
            for _ in 0..iters {
                let (mut sim, switch) = switched_rl();
                // Warm-up period: builds and caches both topologies' propagators.
                run_periods(&mut sim, switch, 0, 1);
                let start = Instant::now();
                run_periods(&mut sim, switch, 1, PERIODS);
                elapsed += start.elapsed();
                black_box(sim.probe(0));
            }
            total += elapsed;
            periods += iters * PERIODS;
            elapsed
        })
    });
    group.finish();
    if periods > 0 {
        eprintln!(
            "switched_rl: {:.1} ns per switching period (mean over {periods} periods)",
            total.as_nanos() as f64 / periods as f64
        );
    }
}

criterion_group!(benches, bench);
criterion_main!(benches);
