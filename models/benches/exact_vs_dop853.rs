//! The exact path against the Dop853 reference path on the same closed-loop converter,
//! from the same settled state.
//!
//! Converter: `demo_design()` with 1 µH primary leakage and 200 pF output capacitance
//! across the switch with its body diode, under `demo_controller()`: 11 dynamic states
//! (19 entries in z). The leakage rings with the output capacitance at about 11 MHz
//! after each turn-off and the reset diode chatters on that ring, so a period holds
//! some fifty switching instants. Secondary leakage is left out here: in series with
//! the rectifier's 1 MΩ off-state it is a 0.5 ps time constant, which an explicit
//! integrator must resolve step by step (about two minutes of Dop853 per period).
//!
//! Both paths continue one exact run settled for 900 periods (6 ms). Dop853 runs at its
//! default tolerances (rtol 1e-10, atol 1e-12) with events bracketed to the exact path's
//! resolution (1 ps) and its stiffness stop off: the on-state switch across its output
//! capacitance is a 10 ps time constant that caps its step size whatever the tolerance.
//! The exact path is timed over 10,000 periods; Dop853, which needs seconds per period,
//! over one period per sample, with an exact twin stepped alongside (untimed) to compare
//! the output voltage at every clock edge and every switching instant, element by
//! element.
//!
//! `cargo bench -p stepflux-models --bench exact_vs_dop853`

use std::time::{Duration, Instant};

use criterion::{criterion_group, criterion_main, Criterion, SamplingMode};
use stepflux_engine::reference::{ReferenceOptions, ReferenceRun};
use stepflux_engine::{NullSink, Sink, Topology};
use stepflux_models::controller::modulator::ClosedLoop;
use stepflux_models::controller::ControllerSpec;
use stepflux_models::cycles::{CycleRecord, CycleSink};
use stepflux_models::demo_design::{demo_controller, demo_design, power_diode};
use stepflux_models::template::ForwardDesign;

const SETTLE_PERIODS: f64 = 900.0;
const EXACT_PERIODS: u64 = 10_000;
/// Two transitions of one element are the same switching instant when their states
/// agree and their times differ by at most this, seconds: far above the paths' observed
/// agreement (below a nanosecond) and below the shortest interval between transitions
/// of one element on the ring (about 15 ns).
const SAME_INSTANT: f64 = 5e-9;

/// Drops cycle records.
struct NoCycles;

impl CycleSink for NoCycles {
    fn cycle(&mut self, _: &CycleRecord) {}
}

/// Records every topology change.
#[derive(Default)]
struct Changes(Vec<(f64, Topology, Topology)>);

impl Sink for Changes {
    fn sample(&mut self, _: f64, _: &[f64], _: bool) -> Result<(), String> {
        Ok(())
    }

    fn topology_change(&mut self, t: f64, before: Topology, after: Topology) -> Result<(), String> {
        self.0.push((t, before, after));
        Ok(())
    }
}

fn converter() -> (ForwardDesign, ControllerSpec) {
    let mut d = demo_design();
    d.transformer.primary_leakage = 1e-6;
    d.switch.output_capacitance = 200e-12;
    d.switch.body_diode = Some(power_diode());
    (d, demo_controller())
}

/// Agreement of the two paths so far.
#[derive(Default)]
struct Agreement {
    periods: usize,
    dv_out: f64,
    /// Largest |Δt| over transitions matched element by element, before any element's
    /// sequences part.
    dt: f64,
    matched: usize,
    /// First transition one path has and the other has not: (time, element).
    parted: Option<(f64, String)>,
    /// Largest |Δt| of the main switch's transitions over the whole comparison (NaN
    /// if their counts differ).
    dt_switch: f64,
}

/// Transitions of switchable element `bit`: (time, now on).
fn of_bit(changes: &Changes, bit: usize) -> Vec<(f64, bool)> {
    changes
        .0
        .iter()
        .filter(|(_, b, a)| b.is_on(bit) != a.is_on(bit))
        .map(|&(t, _, a)| (t, a.is_on(bit)))
        .collect()
}

fn compare(exact: &Changes, reference: &Changes, names: &[String], out: &mut Agreement) {
    let mut parted: Option<(f64, String)> = None;
    let mut pairs = Vec::new();
    for (bit, name) in names.iter().enumerate() {
        let (a, b) = (of_bit(exact, bit), of_bit(reference, bit));
        let same = a
            .iter()
            .zip(&b)
            .take_while(|(x, y)| x.1 == y.1 && (x.0 - y.0).abs() <= SAME_INSTANT)
            .count();
        if same < a.len().max(b.len()) {
            let first = |v: &[(f64, bool)]| v.get(same).map_or(f64::INFINITY, |x| x.0);
            let t = first(&a).min(first(&b));
            if parted.as_ref().is_none_or(|p| t < p.0) {
                parted = Some((t, name.clone()));
            }
        }
        pairs.extend(
            a.iter()
                .zip(&b)
                .take(same)
                .map(|(x, y)| (x.0, (x.0 - y.0).abs())),
        );
        if name == "sw" && a.len() == b.len() {
            let dt = a.iter().zip(&b).map(|(x, y)| (x.0 - y.0).abs());
            out.dt_switch = dt.fold(out.dt_switch, f64::max);
        } else if name == "sw" {
            out.dt_switch = f64::NAN;
        }
    }
    let before = parted.as_ref().map_or(f64::INFINITY, |p| p.0);
    let kept: Vec<f64> = pairs.iter().filter(|p| p.0 < before).map(|p| p.1).collect();
    out.matched = kept.len();
    out.dt = kept.iter().copied().fold(0.0, f64::max);
    out.parted = parted;
}

fn bench(c: &mut Criterion) {
    let (design, spec) = converter();
    let period = spec.clock_period();
    let options = ClosedLoop::default_options(&spec);
    let mut settled = ClosedLoop::new(&design, &spec, &[], options).expect("converter builds");
    let t0 = SETTLE_PERIODS * period;
    settled
        .advance_to(t0, &mut NullSink, &mut NoCycles)
        .expect("converter settles");
    let nx = settled.run.sim.system().layout().nx();
    let names: Vec<String> = {
        let system = settled.run.sim.system();
        let layout = system.layout();
        let circuit = system.circuit();
        layout
            .switchable
            .iter()
            .map(|&e| circuit.element(e).name.clone())
            .collect()
    };
    let reference_options = ReferenceOptions {
        event_tolerance: options.event_resolution,
        max_steps: u32::MAX,
        stop_when_stiff: false,
        ..ReferenceOptions::for_period(period)
    };

    let mut group = c.benchmark_group("exact_vs_dop853");
    group.sample_size(10);
    group.sampling_mode(SamplingMode::Flat);
    group.warm_up_time(Duration::from_millis(500));
    group.measurement_time(Duration::from_secs(10));

    let mut exact = ClosedLoop::new(&design, &spec, &[], options).expect("converter builds");
    exact.continue_from(&settled).expect("same converter");
    let (mut t, mut exact_time, mut exact_periods) = (t0, Duration::ZERO, 0u64);
    group.bench_function("exact_10k_periods", |b| {
        b.iter_custom(|iters| {
            let start = Instant::now();
            for _ in 0..iters {
                t += EXACT_PERIODS as f64 * period;
                exact
                    .advance_to(t, &mut NullSink, &mut NoCycles)
                    .expect("exact path runs");
            }
            let elapsed = start.elapsed();
            exact_time += elapsed;
            exact_periods += iters * EXACT_PERIODS;
            elapsed
        })
    });

    let mut dop: ClosedLoop<ReferenceRun> =
        ClosedLoop::with_stepper(&design, &spec, &[], reference_options, |_| Ok(Vec::new()))
            .expect("converter builds");
    dop.continue_from(&settled).expect("same converter");
    let mut twin = ClosedLoop::new(&design, &spec, &[], options).expect("converter builds");
    twin.continue_from(&settled).expect("same converter");
    let (mut on_dop, mut on_twin) = (Changes::default(), Changes::default());
    let (mut t, mut dop_time, mut dop_periods) = (t0, Duration::ZERO, 0u64);
    let mut agreement = Agreement::default();
    group.bench_function("dop853_1_period", |b| {
        b.iter_custom(|iters| {
            let mut elapsed = Duration::ZERO;
            for _ in 0..iters {
                t += period;
                let start = Instant::now();
                dop.advance_to(t, &mut on_dop, &mut NoCycles)
                    .expect("Dop853 path runs");
                elapsed += start.elapsed();
                twin.advance_to(t, &mut on_twin, &mut NoCycles)
                    .expect("exact path runs");
                let dv = twin.run.probe("out.v").unwrap_or(f64::NAN)
                    - dop.run.probe("out.v").unwrap_or(f64::NAN);
                agreement.dv_out = agreement.dv_out.max(dv.abs());
                agreement.periods += 1;
            }
            dop_time += elapsed;
            dop_periods += iters;
            elapsed
        })
    });
    group.finish();
    compare(&on_twin, &on_dop, &names, &mut agreement);
    report(
        nx,
        (exact_time, exact_periods),
        (dop_time, dop_periods),
        &agreement,
    );
}

fn report(nx: usize, exact: (Duration, u64), dop: (Duration, u64), a: &Agreement) {
    if exact.1 == 0 || dop.1 == 0 {
        return;
    }
    let per = |(d, n): (Duration, u64)| d.as_secs_f64() / n as f64;
    let (e, r) = (per(exact), per(dop));
    eprintln!(
        "exact_vs_dop853 ({nx} states): exact {:.1} µs/period over {} periods; \
         Dop853 {:.3} s/period over {} periods; exact is {:.0}x faster",
        e * 1e6,
        exact.1,
        r,
        dop.1,
        r / e
    );
    eprintln!(
        "  agreement over {} periods: max |Δv_out| at clock edges {:.2e} V; \
         main switch instants max |Δt| {:.2e} s; {} switching instants matched \
         element by element, max |Δt| {:.2e} s",
        a.periods, a.dv_out, a.dt_switch, a.matched, a.dt
    );
    if let Some((t, name)) = &a.parted {
        eprintln!("  the sequences part at t = {t:.9e} s ({name})");
    }
}

criterion_group!(benches, bench);
criterion_main!(benches);
