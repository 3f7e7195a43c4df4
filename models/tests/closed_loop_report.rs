//! End to end: the demo converter starts under its controller, takes a 4 → 6 A load
//! step and then a 24 → 36 V line step, and every measurement of `measure` is produced
//! from one streaming run and printed (run with `--nocapture`; the figures go into the
//! issue note).
//!
//! Beyond "every figure is there and finite", three figures are held against outside
//! relations:
//! - output ripple: the output capacitor carries the inductor ripple ΔI_L, whose
//!   peak-to-peak across the ESR is ESR·ΔI_L, and the capacitance adds at most
//!   ΔI_L/(8·f·C) (Erickson & Maksimović, *Fundamentals of Power Electronics*, 2nd ed.,
//!   ch. 2, capacitor ripple; ESR ripple: common practice). The capacitive part is
//!   zero at the switching instants where the ESR part peaks (the capacitor current
//!   ramps symmetrically through zero between them), and the load resistor R takes
//!   ripple/R of the ripple current, so the sampled peak-to-peak lies between
//!   ESR·ΔI_L/(1 + ESR/R) (1 % allowed below, for the ripple's shape) and
//!   ESR·ΔI_L + ΔI_L/(8·f·C);
//! - load-step undershoot: ΔV ≈ ΔI/(2π·f_c·C_out) for a loop crossing over at f_c
//!   (common practice); the demo loop is designed for 15 kHz. A rule of thumb only, so
//!   a factor of two either way is allowed; a loop that did not respond, or a
//!   measurement that missed the dip, would fall outside;
//! - energy balance, as in `closed_loop_losses.rs`, within 0.1 % of P_in.

mod closed_loop_rig;

use closed_loop_rig::*;
use stepflux_models::demo_design::{demo_controller, demo_design, DEMO_FREQUENCY};
use stepflux_models::disturbance::Disturbance;
use stepflux_models::measure::{
    CossTurnOn, Figure, LossReport, Measurement, ResetCheck, ResetLimits, Ripple, StartUp,
    StepResponse, StepSettings,
};

const T_LOAD: f64 = 5e-3;
const T_LINE: f64 = 7e-3;
const T_END: f64 = 9e-3;
const LOAD_STEP: f64 = 2.0;
/// Controller and gate-drive bias for the whole-converter efficiency, watts (common
/// practice for a PWM controller of this size).
const BIAS: f64 = 0.3;

fn step(label: &str, at: f64, until: f64, set_point: f64) -> StepSettings {
    StepSettings {
        label: label.into(),
        step_time: at,
        set_point,
        band: 0.01,
        duty_window: 0.3e-3,
        settle_from: until - 0.3e-3,
        until,
    }
}

#[test]
fn start_up_load_step_and_line_step_produce_every_measurement() {
    let design = demo_design();
    let spec = demo_controller();
    let set_point = spec.voltage_loop.set_point();
    let disturbances = [
        Disturbance::LoadCurrent {
            time: T_LOAD,
            to: LOAD_STEP,
            slew: 1e6,
        },
        Disturbance::Line {
            time: T_LINE,
            to: 36.0,
            slew: 1e6,
        },
    ];
    let mut rig = Rig::new(&design, &spec, &disturbances, 1e-6);
    let probes = rig.cl.run.probes().to_vec();
    let (w0, w1) = (T_LOAD - periods(75.0, DEMO_FREQUENCY), T_LOAD);
    let mut startup = StartUp::new(&probes, set_point, 0.05, 0.0, T_LOAD).unwrap();
    let mut ripple = Ripple::new(&probes, "out.v", w0, w1).unwrap();
    let mut inductor = Ripple::new(&probes, "lout.i", w0, w1).unwrap();
    let mut coss = CossTurnOn::new(rig.ledger.main_switch_coss(), w0, w1);
    let mut load =
        StepResponse::new(&probes, step("load_step", T_LOAD, T_LINE, set_point)).unwrap();
    let mut line = StepResponse::new(&probes, step("line_step", T_LINE, T_END, set_point)).unwrap();
    let mut reset = ResetCheck::new(&design, &probes, ResetLimits::for_design(&design)).unwrap();

    let mut segment = |rig: &mut Rig, t: f64| {
        let ms: Vec<&mut dyn Measurement> = vec![
            &mut startup,
            &mut ripple,
            &mut inductor,
            &mut coss,
            &mut load,
            &mut line,
            &mut reset,
        ];
        rig.run(t, ms, &mut NoCycles);
    };
    segment(&mut rig, w0);
    let a = rig.ledger.snapshot(&rig.cl.run.sim).unwrap();
    segment(&mut rig, w1);
    let b = rig.ledger.snapshot(&rig.cl.run.sim).unwrap();
    segment(&mut rig, T_END);
    let losses = LossReport::between(&rig.ledger, &a, &b, coss.energy()).unwrap();

    let mut all: Vec<Figure> = Vec::new();
    for m in [
        &startup as &dyn Measurement,
        &ripple,
        &inductor,
        &coss,
        &load,
        &line,
        &reset,
    ] {
        all.extend(m.figures());
    }
    all.extend(losses.figures(BIAS));
    for f in &all {
        println!("{f}");
    }
    println!("reset check: {}", reset.verdict());

    for f in &all {
        assert!(f.has_value(), "{} is not finite", f.key);
    }
    for name in [
        "startup.t90",
        "startup.overshoot",
        "startup.monotonic",
        "startup.max_duty",
        "out.v.ripple_pp",
        "out.v.mean",
        "load_step.undershoot",
        "load_step.overshoot",
        "load_step.recovery",
        "load_step.steady_error",
        "load_step.duty_spread_after",
        "line_step.undershoot",
        "line_step.overshoot",
        "line_step.recovery",
        "line_step.steady_error",
        "line_step.duty_spread_after",
        "reset_check.pass",
        "efficiency.stage",
        "efficiency.with_bias",
        "loss.switch.conduction",
        "loss.diode",
    ] {
        assert!(all.iter().any(|f| f.key == name), "no figure {name}");
    }

    // Ripple against ESR·ΔI_L/(1 + ESR/R) and ESR·ΔI_L + ΔI_L/(8fC).
    let c = &design.output_capacitor;
    let r_load = design.load.resistance.unwrap();
    let di = inductor.result().unwrap().peak_to_peak;
    let pp = ripple.result().unwrap().peak_to_peak;
    let lo = c.esr * di / (1.0 + c.esr / r_load);
    let hi = c.esr * di + di / (8.0 * DEMO_FREQUENCY * c.capacitance);
    println!("ripple {pp:.5} V for ΔI_L {di:.4} A: between {lo:.5} V and {hi:.5} V");
    assert!(pp >= 0.99 * lo && pp <= hi);

    // Load-step undershoot against ΔI/(2π·f_c·C).
    let estimate = LOAD_STEP / (2.0 * std::f64::consts::PI * 15e3 * c.capacitance);
    let dip = load.result().unwrap().undershoot;
    println!("load-step undershoot {dip:.4} V, rule of thumb {estimate:.4} V");
    assert!(dip > 0.5 * estimate && dip < 2.0 * estimate);

    // The energy account closes.
    let balance = losses.balance_error() / losses.input_power();
    assert!(balance.abs() < 1e-3, "balance {balance:e}");
    assert!(reset.verdict().passed(), "{}", reset.verdict());
}
