//! Handing a run from one integration path to the other ([`Stepper::handover`],
//! [`Stepper::take_over`]) and driving both through the one [`Stepper`] trait.
//!
//! Specification: an RC low-pass driven by a ramp that stops, v_in(t) = a·t up to t1
//! and a·t1 after (R = 1 kΩ, C = 1 µF, τ = 1 ms). While ramping,
//! v(t) = a·(t − τ·(1 − e^(−t/τ))) (convolution of the ramp with the RC impulse
//! response, e.g. Hayt, Kemmerly & Durbin, *Engineering Circuit Analysis*, ch. 8, from
//! memory); after t1 it relaxes towards a·t1 with time constant τ. A handover in the
//! middle of the ramp must carry the source's value and slope (they travel in z) and the
//! next breakpoint (recomputed from the time), so the continued run meets the closed
//! form after the ramp has stopped as well as during it.

use stepflux_engine::reference::{ReferenceOptions, ReferenceRun};
use stepflux_engine::{
    Circuit, NodeId, NullSink, Observation, Quantity, Signal, SimOptions, Simulation, Stepper,
    Waveform,
};

const TAU: f64 = 1e-3;
const SLOPE: f64 = 500.0;
const T1: f64 = 2e-3;

fn ramp_rc() -> (Circuit, Observation) {
    let mut c = Circuit::new();
    let (vin, out) = (c.node("in"), c.node("out"));
    let ramp = Waveform::PiecewiseLinear(vec![(0.0, 0.0), (T1, SLOPE * T1)]);
    c.voltage_source("V1", vin, NodeId::GROUND, ramp).unwrap();
    c.resistor("R1", vin, out, 1e3).unwrap();
    c.capacitor("C1", out, NodeId::GROUND, 1e-6, 0.0).unwrap();
    let obs = Observation {
        probes: vec![("out".into(), Signal::of(Quantity::NodeVoltage(out)))],
        ..Default::default()
    };
    (c, obs)
}

fn closed_form(t: f64) -> f64 {
    let ramping = |t: f64| SLOPE * (t - TAU * (1.0 - (-t / TAU).exp()));
    if t <= T1 {
        ramping(t)
    } else {
        SLOPE * T1 + (ramping(T1) - SLOPE * T1) * (-(t - T1) / TAU).exp()
    }
}

/// Runs `first` to `t_hand`, hands over to `second`, runs it to 4 ms; returns the worst
/// deviation from the closed form at the checkpoints after the handover.
fn continue_on<A: Stepper, B: Stepper>(mut first: A, mut second: B, t_hand: f64) -> f64 {
    first.advance(t_hand, &mut NullSink).unwrap();
    second.take_over(&first.handover()).unwrap();
    // The exact path keeps time on its tick grid (ticks of at most the 1 ps resolution
    // of `for_period(τ)`), so a handed-over time moves by at most one tick.
    assert!((second.time() - first.time()).abs() <= 1e-12);
    let mut worst: f64 = 0.0;
    for k in 1..=8 {
        let t = t_hand + k as f64 * (4e-3 - t_hand) / 8.0;
        second.advance(t, &mut NullSink).unwrap();
        worst = worst.max((second.probe(0) - closed_form(second.time())).abs());
    }
    worst
}

fn exact() -> Simulation {
    let (c, obs) = ramp_rc();
    Simulation::new(c, obs, SimOptions::for_period(TAU)).unwrap()
}

fn reference() -> ReferenceRun {
    let (c, obs) = ramp_rc();
    ReferenceRun::new(c, obs, ReferenceOptions::for_period(TAU)).unwrap()
}

#[test]
fn exact_run_continued_on_the_reference_path_meets_the_closed_form() {
    // 1e-8 V on a 1 V-scale signal: the reference path's own budget for this circuit in
    // the cross-check tests (rtol 1e-10 per step over a few hundred steps); the exact
    // part before the handover adds round-off only.
    let worst = continue_on(exact(), reference(), 1.3e-3);
    assert!(worst < 1e-8, "worst deviation {worst:e} V");
}

#[test]
fn reference_run_continued_on_the_exact_path_meets_the_closed_form() {
    // Same budget: the error comes from the reference part before the handover.
    let worst = continue_on(reference(), exact(), 0.7e-3);
    assert!(worst < 1e-8, "worst deviation {worst:e} V");
}

#[test]
fn a_handover_of_the_wrong_length_is_refused() {
    let mut sim = exact();
    let mut h = sim.handover();
    h.state.pop();
    assert!(sim.take_over(&h).is_err());
}
