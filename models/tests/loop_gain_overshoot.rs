//! Phase margin against load-step overshoot: of two compensator settings on the demo
//! converter, the one whose sampled-data loop gain has the smaller phase margin rings
//! more after the same load step.
//!
//! Expectation: a loop crossing over with phase margin φ behaves near crossover like a
//! second-order system whose damping falls with φ (ζ ≈ φ/100 for φ below about 60°),
//! and a less damped second-order system overshoots more (Ogata, *Modern Control
//! Engineering*, §5-3, transient response of second-order systems; the ζ–φ rule of
//! thumb is common practice). The absolute overshoot depends on the load-step's
//! spectrum and the output impedance, so only the order is specified.

use stepflux_engine::NullSink;
use stepflux_models::controller::modulator::ClosedLoop;
use stepflux_models::controller::{Compensation, ControllerSpec};
use stepflux_models::demo_design::{demo_controller, demo_design};
use stepflux_models::disturbance::Disturbance;
use stepflux_models::loopgain::{margins, sampled_model, LinearOptions};
use stepflux_models::steady::map::{settled_spec, trial_options};
use stepflux_models::steady::names::{place, state_names};
use stepflux_models::template::ForwardDesign;

/// The demo's compensator with its two high-frequency poles moved down to 16 and
/// 20 kHz, about the crossover: nearly the same gain below crossover, but their lag
/// eats the double zero's phase boost there (measured: 15.5° against the demo's 48.3°
/// at this load; overshoot 74 mV against 41 mV). Raising the integrator gain instead
/// lowers the phase margin too but also raises the crossover, and the higher
/// crossover's lower output impedance then shrinks the peak (12.5°: 35 mV): the
/// comparison needs the crossover held about where it is.
fn less_damped() -> ControllerSpec {
    let mut spec = demo_controller();
    if let Compensation::PolesZeros { poles_hz, .. } = &mut spec.voltage_loop.compensation {
        *poles_hz = vec![POLES.0, POLES.1];
    }
    spec
}

const POLES: (f64, f64) = (16e3, 20e3);

/// The demo converter at its 4 A, half in a 2.5 Ω resistor and half in a current sink
/// that the load step can move.
fn design() -> ForwardDesign {
    let mut d = demo_design();
    d.load.resistance = Some(2.5);
    d.load.current = Some(2.0);
    d
}

/// Phase margin of the sampled-data loop gain, degrees.
fn phase_margin(spec: &ControllerSpec) -> f64 {
    let (_, m) = sampled_model(&design(), spec, &LinearOptions::default()).unwrap();
    let fs = 1.0 / m.period;
    margins(fs / 1000.0, fs / 2.0, |f| Ok(m.at(f)?.loop_gain))
        .unwrap()
        .phase_margin
        .unwrap()
}

/// Largest rise of the output above its pre-step value after the load falls 4 → 2 A
/// (the sink steps to zero), sampled at every clock edge (the edge samples sit at the
/// same point of the ripple each period, so the ripple does not enter the
/// comparison), from the steady state.
fn overshoot(spec: &ControllerSpec) -> f64 {
    let spec = settled_spec(spec);
    let (steady, _) = sampled_model(&design(), &spec, &LinearOptions::default()).unwrap();
    let t = spec.clock_period();
    let t_step = 10.0 * t;
    let step = [Disturbance::LoadCurrent {
        time: t_step,
        to: 0.0,
        slew: 0.0,
    }];
    let mut lp = ClosedLoop::new(&design(), &spec, &step, trial_options(t)).unwrap();
    let at = lp.snapshot();
    let names = state_names(lp.run.sim.system());
    let mut x = at.run.handover.state[..names.len()].to_vec();
    place(&names, &steady.named(), &mut x).unwrap();
    lp.restore(&at, &x).unwrap();
    let mut cycles = Vec::new();
    let mut before = None;
    let mut peak = f64::NEG_INFINITY;
    for k in 1..=300 {
        lp.advance_to(k as f64 * t, &mut NullSink, &mut cycles)
            .unwrap();
        let v = lp.run.probe("out.v").unwrap();
        if (k as f64) * t <= t_step {
            before = Some(v);
        } else {
            peak = peak.max(v);
        }
    }
    peak - before.unwrap()
}

#[test]
fn smaller_phase_margin_overshoots_more() {
    // Fails if the margins are read wrongly (the order of the phase margins reverses)
    // or if the loop-gain model does not describe the switching loop's damping.
    let (demo, sharp) = (demo_controller(), less_damped());
    let (pm_demo, pm_sharp) = (phase_margin(&demo), phase_margin(&sharp));
    // The setting must really be less damped, by a clear margin, for the comparison
    // to mean anything.
    assert!(pm_sharp < pm_demo - 10.0, "{pm_sharp}° vs {pm_demo}°");
    let (os_demo, os_sharp) = (overshoot(&demo), overshoot(&sharp));
    assert!(os_demo > 0.0, "no overshoot at all: {os_demo}");
    assert!(
        os_sharp > os_demo,
        "overshoot {os_sharp} V at {pm_sharp}° vs {os_demo} V at {pm_demo}°"
    );
}
