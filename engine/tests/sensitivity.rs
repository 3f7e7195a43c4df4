//! ∂x(T)/∂x(0) carried along a run ([`Simulation::track_sensitivity`]) against central
//! differences of the same run.
//!
//! Specification: over one period of a switched piecewise-linear circuit the
//! sensitivity of the final state to the initial one is the product of the segment
//! propagators with a saltation matrix I + (f⁺ − f⁻)·∇gᵀ/(∇g·f⁻ + ∂g/∂t) at each
//! instant that moves with the state (Aprille & Trick, Proc. IEEE 60(1), 1972, §III;
//! Leine & Nijmeijer, "Dynamics and Bifurcations of Non-smooth Mechanical Systems",
//! Springer 2004, §3.5). The circuit: a buck stage (12 V, switch, freewheel diode,
//! 10 µH, 10 µF, 20 Ω) under a current-mode drive with slope compensation: on at the
//! clock (scheduled: no saltation), off when the inductor current reaches a falling
//! threshold I_pk − m·t (an armed event whose function depends on time, ∂g/∂t = m)
//! after a gate delay (a delayed instant, tied with `delay_from`), the freewheel diode
//! turning on in the same instant (a settling cascade), and off again when its current
//! reaches zero (a diode event: discontinuous conduction).
//!
//! Tolerance: the run locates each instant to one tick q, so the difference quotient
//! sees the map's steps of |f⁺ − f⁻|·q ≤ (12 V / 10 µH)·q ≈ 1.2e6 A/s · q across the
//! perturbation: with q ≤ 1e-16 s and h = 1e-5 that is ≤ 1.2e-10 / 2e-5 ≈ 6e-6 per
//! entry for the inductor current row (less for the capacitor), and the central
//! difference's own error h²·|P'''| is far smaller on a map that is piecewise a product
//! of exponentials. Entries must agree to 1e-4 of the largest entry, well above both.

use nalgebra::DMatrix;
use stepflux_engine::{
    Circuit, DiodeParams, Direction, ElementId, EventFn, NodeId, NullSink, Observation, Quantity,
    Signal, SimOptions, Simulation, Stop, SwitchParams, Waveform,
};

const PERIOD: f64 = 10e-6;
const GATE_DELAY: f64 = 0.3e-6;
/// Slope compensation, A/s.
const RAMP: f64 = 0.1e6;

/// Load, current threshold at the clock and start: discontinuous conduction with
/// 20 Ω, 2 A from 0.8 A and 4 V; continuous with 2 Ω, 4 A from 1.2 A and 4 V.
#[derive(Clone, Copy)]
struct Case {
    load: f64,
    i_peak: f64,
    i_start: f64,
    v_start: f64,
}

const DCM: Case = Case {
    load: 20.0,
    i_peak: 2.0,
    i_start: 0.8,
    v_start: 4.0,
};

const CCM: Case = Case {
    load: 2.0,
    i_peak: 4.0,
    i_start: 1.2,
    v_start: 4.0,
};

struct Buck {
    sim: Simulation,
    switch: ElementId,
    case: Case,
}

fn buck(case: Case) -> Buck {
    let mut c = Circuit::new();
    let g = NodeId::GROUND;
    let (vin, sw, out) = (c.node("in"), c.node("sw"), c.node("out"));
    c.voltage_source("V", vin, g, Waveform::Constant(12.0))
        .unwrap();
    let (r_on, r_off) = (0.01, 1e6);
    let switch = c
        .switch("S", vin, sw, SwitchParams { r_on, r_off }, false)
        .unwrap();
    c.diode(
        "D",
        g,
        sw,
        DiodeParams {
            vf: 0.5,
            r_on,
            r_off,
        },
    )
    .unwrap();
    let l = c.inductor("L", sw, out, 10e-6, 0.0).unwrap();
    c.capacitor("C", out, g, 10e-6, 0.0).unwrap();
    c.resistor("R", out, g, case.load).unwrap();
    let obs = Observation {
        event_signals: vec![Signal::of(Quantity::Current(l))],
        ..Default::default()
    };
    let options = SimOptions {
        event_resolution: 1e-16,
        ..SimOptions::for_period(PERIOD)
    };
    Buck {
        sim: Simulation::new(c, obs, options).unwrap(),
        switch,
        case,
    }
}

/// One period from t = 0 and states `x0`: the final states and, when `track`, the
/// sensitivity. `tie`: whether the delayed turn-off is tied to its crossing.
fn period(b: &mut Buck, x0: &[f64], track: bool, tie: bool) -> (Vec<f64>, Option<DMatrix<f64>>) {
    let offset = -b.case.i_peak;
    let sim = &mut b.sim;
    sim.take_over(&stepflux_engine::Handover {
        time: 0.0,
        state: {
            let mut z = sim.state().as_slice().to_vec();
            z[..x0.len()].copy_from_slice(x0);
            z
        },
        topology: sim.topology(),
    })
    .unwrap();
    sim.track_sensitivity(track);
    sim.set_gate(b.switch, true).unwrap();
    let slot = sim
        .arm(EventFn {
            signal: 0,
            offset,
            rate: RAMP,
            t_ref: 0.0,
            direction: Direction::Rising,
        })
        .unwrap();
    let stop = sim.advance(0.8 * PERIOD, &mut NullSink).unwrap();
    sim.disarm(slot);
    let t_off = match stop {
        Stop::Armed { time, .. } => time,
        Stop::Reached => panic!("the current never reached the threshold"),
    };
    let stamp = sim.last_event_stamp();
    assert_eq!(stamp.is_some(), track, "a stamp exactly while tracking");
    sim.advance(t_off + GATE_DELAY, &mut NullSink).unwrap();
    if let (Some(s), true) = (stamp, tie) {
        sim.delay_from(s);
    }
    sim.set_gate(b.switch, false).unwrap();
    sim.advance(PERIOD, &mut NullSink).unwrap();
    let nx = x0.len();
    let x = sim.state().as_slice()[..nx].to_vec();
    (x, sim.sensitivity().cloned())
}

fn central_differences(b: &mut Buck, x0: &[f64]) -> DMatrix<f64> {
    let nx = x0.len();
    let h = 1e-5;
    let mut j = DMatrix::zeros(nx, nx);
    for c in 0..nx {
        let (mut up, mut down) = (x0.to_vec(), x0.to_vec());
        up[c] += h;
        down[c] -= h;
        let (fu, _) = period(b, &up, false, false);
        let (fd, _) = period(b, &down, false, false);
        for r in 0..nx {
            j[(r, c)] = (fu[r] - fd[r]) / (2.0 * h);
        }
    }
    j
}

fn start(b: &Buck) -> Vec<f64> {
    let layout = b.sim.system().layout();
    let mut x = vec![0.0; layout.nx()];
    for (k, kind) in layout.states.iter().enumerate() {
        x[k] = match kind {
            stepflux_engine::StateKind::InductorCurrent(_) => b.case.i_start,
            _ => b.case.v_start,
        };
    }
    x
}

/// The sensitivity over one period of `case`, checked against central differences;
/// returns the final states.
fn agree(case: Case) -> (Buck, Vec<f64>) {
    let mut b = buck(case);
    let x0 = start(&b);
    let (plain, none) = period(&mut b, &x0, false, true);
    assert!(none.is_none(), "no sensitivity unless asked for");
    let (tracked, s) = period(&mut b, &x0, true, true);
    // Tracking must not change the run.
    assert_eq!(plain, tracked);
    let s = s.expect("every instant accounted for");
    let fd = central_differences(&mut b, &x0);
    let scale = fd.abs().max();
    println!("sensitivity {s}central differences {fd}");
    assert!(
        (&s - &fd).abs().max() <= 1e-4 * scale,
        "sensitivity {s} differences {fd}"
    );
    (b, tracked)
}

fn inductor(b: &Buck) -> usize {
    b.sim
        .system()
        .layout()
        .states
        .iter()
        .position(|k| matches!(k, stepflux_engine::StateKind::InductorCurrent(_)))
        .unwrap()
}

#[test]
fn sensitivity_equals_central_differences_in_discontinuous_conduction() {
    let (b, x) = agree(DCM);
    // DCM at the period's end: the inductor current forgets where it started.
    let il = inductor(&b);
    assert!(x[il].abs() < 1e-3, "not in DCM: {}", x[il]);
}

#[test]
fn sensitivity_equals_central_differences_in_continuous_conduction() {
    let (b, x) = agree(CCM);
    let il = inductor(&b);
    assert!(x[il] > 0.5, "not in CCM: {}", x[il]);
}

#[test]
fn an_untied_delayed_instant_is_taken_as_scheduled() {
    // Without `delay_from` the turn-off a gate delay after the crossing counts as a
    // scheduled instant, which leaves out its saltation: the result then differs from
    // the differences by far more than their error, which is why drivers must tie it.
    let mut b = buck(CCM);
    let x0 = start(&b);
    let (_, s) = period(&mut b, &x0, true, false);
    let fd = central_differences(&mut b, &x0);
    let s = s.unwrap();
    assert!((&s - &fd).abs().max() > 1e-2 * fd.abs().max(), "{s} {fd}");
}
