//! What the exact path sees inside a long step: an event function that crosses zero
//! and comes back within one step, and a probe's extremum between two step ends.
//!
//! Specification: a crossing is found whatever the step length (DEVELOPERS.md, "The
//! engine's method", events), and the extrema reported by the trace are the exact
//! solution's. Each check is held against a closed form or against the independent
//! Dop853 path (Hairer, Nørsett & Wanner, *Solving Ordinary Differential Equations I*,
//! 2nd ed., section II.5), as in `cross_check.rs`.

use stepflux_engine::reference::{ReferenceOptions, ReferenceRun};
use stepflux_engine::{
    Circuit, DiodeParams, ElementId, NodeId, Observation, Quantity, Signal, SimOptions, Simulation,
    Sink, StepOutcome, SwitchParams, TraceKind, TracePoint, Turning, Waveform,
};

/// Every trace point: (time, value of probe 0, kind).
#[derive(Default)]
struct Points(Vec<(f64, f64, TraceKind)>);

impl Sink for Points {
    fn sample(&mut self, _: f64, _: &[f64], _: bool) -> Result<(), String> {
        Ok(())
    }
    fn trace(&mut self, p: &TracePoint<'_>) -> Result<(), String> {
        self.0.push((p.time, p.values[0], p.kind));
        Ok(())
    }
    fn traces(&self) -> bool {
        true
    }
}

/// A 10 V source switched at t = 0 into C1 (1 nF) in series with R2 (1 kΩ) to ground
/// (τ1 = 1 µs), followed by R3 (100 Ω) into C3 (1 nF, τ2 = 100 ns): the voltage on C3
/// is a hump of a few microseconds, about 7 V high (difference of two exponentials).
/// A diode with a threshold `vf` (3 V) across C3 conducts while the hump is above it: a
/// crossing and its return, both inside one 100 µs step of a run that does not know
/// the hump is coming.
fn hump(vf: f64) -> (Circuit, Observation, ElementId) {
    let mut c = Circuit::new();
    let (s, a, b, out) = (c.node("s"), c.node("a"), c.node("b"), c.node("out"));
    c.voltage_source("V1", s, NodeId::GROUND, Waveform::Constant(10.0))
        .unwrap();
    let sw = c
        .switch(
            "S1",
            s,
            a,
            SwitchParams {
                r_on: 1e-3,
                r_off: 1e9,
            },
            false,
        )
        .unwrap();
    c.capacitor("C1", a, b, 1e-9, 0.0).unwrap();
    c.resistor("R2", b, NodeId::GROUND, 1e3).unwrap();
    c.resistor("R3", b, out, 100.0).unwrap();
    c.capacitor("C3", out, NodeId::GROUND, 1e-9, 0.0).unwrap();
    let params = DiodeParams {
        vf,
        r_on: 10.0,
        r_off: 1e9,
    };
    c.diode("D1", out, NodeId::GROUND, params).unwrap();
    let obs = Observation {
        probes: vec![("out".into(), Signal::of(Quantity::NodeVoltage(out)))],
        ..Default::default()
    };
    (c, obs, sw)
}

/// The diode's switching instants over 200 µs after the switch closes, from either path.
fn instants_exact() -> Vec<f64> {
    let (c, obs, sw) = hump(3.0);
    // One step may span 100 µs, a hundred times the hump.
    let options = SimOptions::for_period(400e-6);
    let mut sim = Simulation::new(c, obs, options).unwrap();
    sim.set_gate(sw, true).unwrap();
    let mut out = Vec::new();
    loop {
        match sim.step_to(200e-6, &mut Points::default()).unwrap() {
            StepOutcome::Event { time, diode, .. } if diode.is_some() => out.push(time),
            StepOutcome::StopTime => return out,
            _ => {}
        }
    }
}

fn instants_reference() -> Vec<f64> {
    let (c, obs, sw) = hump(3.0);
    let mut run = ReferenceRun::new(c, obs, ReferenceOptions::for_period(10e-6)).unwrap();
    run.set_gate(sw, true).unwrap();
    let mut out = Vec::new();
    loop {
        match run.step_to(200e-6).unwrap() {
            StepOutcome::Event { time, diode, .. } if diode.is_some() => out.push(time),
            StepOutcome::StopTime => return out,
            _ => {}
        }
    }
}

#[test]
fn a_crossing_and_return_inside_one_long_step_is_found() {
    let exact = instants_exact();
    let reference = instants_reference();
    assert_eq!(
        exact.len(),
        2,
        "the diode turns on and off once: {exact:?} (reference {reference:?})"
    );
    assert_eq!(reference.len(), 2, "{reference:?}");
    for (e, r) in exact.iter().zip(&reference) {
        // Both paths locate to about a picosecond; 1 ns leaves room for the
        // reference's rtol 1e-10 on a slope of a few V/µs.
        assert!((e - r).abs() < 1e-9, "exact {e} vs reference {r}");
    }
}

#[test]
fn extrema_of_a_ringing_rlc_are_the_closed_form() {
    // Series R–L–C switched onto 1 V: the capacitor voltage of an underdamped second-
    // order step response peaks at 1 + exp(−ζπ/√(1−ζ²)) at t = π/ω_d, ω_d = ω₀√(1−ζ²),
    // and its first minimum at 1 − exp(−2ζπ/√(1−ζ²)) at 2π/ω_d (any control or circuits
    // text, e.g. Ogata, *Modern Control Engineering*, section 5-3).
    let (r, l, cap) = (1.0, 10e-6, 1e-6);
    let mut c = Circuit::new();
    let (s, a, m, out) = (c.node("s"), c.node("a"), c.node("m"), c.node("out"));
    c.voltage_source("V1", s, NodeId::GROUND, Waveform::Constant(1.0))
        .unwrap();
    let params = SwitchParams {
        r_on: 1e-9,
        r_off: 1e9,
    };
    let sw = c.switch("S1", s, a, params, false).unwrap();
    c.resistor("R1", a, m, r - 1e-9).unwrap();
    c.inductor("L1", m, out, l, 0.0).unwrap();
    c.capacitor("C1", out, NodeId::GROUND, cap, 0.0).unwrap();
    let obs = Observation {
        probes: vec![("out".into(), Signal::of(Quantity::NodeVoltage(out)))],
        ..Default::default()
    };
    let mut sim = Simulation::new(c, obs, SimOptions::for_period(100e-6)).unwrap();
    sim.trace_probes(&[(0, Turning::Both)]).unwrap();
    sim.set_gate(sw, true).unwrap();
    let mut points = Points::default();
    sim.advance(25e-6, &mut points).unwrap();
    let w0 = 1.0 / (l * cap).sqrt();
    let zeta = 0.5 * r * (cap / l).sqrt();
    let wd = w0 * (1.0 - zeta * zeta).sqrt();
    let k = (-zeta * std::f64::consts::PI / (1.0 - zeta * zeta).sqrt()).exp();
    let extrema: Vec<_> = points
        .0
        .iter()
        .filter(|p| matches!(p.2, TraceKind::Extremum(0)))
        .collect();
    assert!(extrema.len() >= 2, "a peak and a trough: {:?}", points.0);
    let expected = [
        (std::f64::consts::PI / wd, 1.0 + k),
        (2.0 * std::f64::consts::PI / wd, 1.0 - k * k),
    ];
    for ((t, v, _), (te, ve)) in extrema.iter().zip(expected) {
        // The value is read at the nearest tick (1 ps here) of the located extremum:
        // ½·|v''|·(1 ps)² ≈ 1e-13 V, far below 1e-9. Its time is located to the
        // bracket of 1/1024 of a step refined by the slope's zero: 1 ns is generous.
        assert!((v - ve).abs() < 1e-9, "extremum {v} vs {ve}");
        assert!((t - te).abs() < 1e-9, "at {t} vs {te}");
    }
    // Between step ends and extrema nothing lies above the peak: it is the maximum of
    // every point the trace gives.
    let max = points.0.iter().map(|p| p.1).fold(f64::MIN, f64::max);
    assert!((max - (1.0 + k)).abs() < 1e-9);
}

#[test]
fn the_trace_peak_is_the_finely_sampled_reference_peak() {
    // The hump above: its peak from the trace against the highest of the Dop853 path's
    // values every 1 ns. Sampling 1 ns apart misses the top by at most ½·|v''|·(0.5 ns)²,
    // about 1e-6 V on a hump of 1 µs scale and 7 V height; the reference's own error at
    // rtol 1e-10 is smaller still. No diode here (threshold far above the hump).
    let (c, obs, sw) = hump(100.0);
    let mut sim = Simulation::new(c.clone(), obs.clone(), SimOptions::for_period(400e-6)).unwrap();
    sim.trace_probes(&[(0, Turning::Maxima)]).unwrap();
    sim.set_gate(sw, true).unwrap();
    let mut points = Points::default();
    sim.advance(20e-6, &mut points).unwrap();
    let peak = points.0.iter().map(|p| p.1).fold(f64::MIN, f64::max);
    let mut run = ReferenceRun::new(c, obs, ReferenceOptions::for_period(10e-6)).unwrap();
    run.set_gate(sw, true).unwrap();
    let mut sampled = f64::MIN;
    for k in 1..=20_000 {
        run.advance(k as f64 * 1e-9).unwrap();
        sampled = sampled.max(run.probe(0));
    }
    assert!(
        peak >= sampled - 1e-9,
        "trace {peak} below samples {sampled}"
    );
    assert!(peak - sampled < 2e-6, "trace {peak} vs sampled {sampled}");
}
