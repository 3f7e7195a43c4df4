//! The core-reset check in closed loop: a reset winding with too many turns for the
//! duty clamp fails during start-up and names the cycle; a clamp below the reset limit
//! passes.
//!
//! Specification: a reset winding resets the core only while D ≤ 1/(1 + Nr/Np), the
//! reset interval being (Nr/Np)·D·T (R. W. Erickson & D. Maksimović, *Fundamentals of
//! Power Electronics*, 2nd ed., §6.3.2). With Nr/Np = 1.5 the limit is 0.4; the demo's
//! 45 % clamp is above it, so any cycle that runs into the clamp leaves the reset
//! diode conducting at the next turn-on. A fast soft start (0.1 ms) and no reference
//! soft start make start-up run into the clamp.

mod closed_loop_rig;

use closed_loop_rig::*;
use stepflux_models::demo_design::{demo_controller, demo_design};
use stepflux_models::figures::reset_winding_duty_limit;
use stepflux_models::measure::{
    Criterion, Measurement, ResetCheck, ResetLimits, ResetVerdict, Ripple,
};

const NR: f64 = 18.0;

/// Starts the Nr = 18 demo with duty clamp `max_duty`; returns the verdict, the
/// largest duty reached and the highest switch current sampled.
fn start_up(max_duty: f64) -> (ResetVerdict, f64, f64) {
    let mut design = demo_design();
    design.transformer.reset_turns = NR;
    let mut spec = demo_controller();
    spec.max_duty = max_duty;
    spec.soft_start = 0.1e-3;
    spec.voltage_loop.reference_soft_start = 0.0;
    let mut rig = Rig::new(&design, &spec, &[], 0.5e-6);
    let probes = rig.cl.run.probes().to_vec();
    let mut check = ResetCheck::new(&design, &probes, ResetLimits::for_design(&design)).unwrap();
    let mut switch_current = Ripple::new(&probes, "sw.i", 0.0, 1.5e-3).unwrap();
    let mut cycles = Vec::new();
    rig.run(1.5e-3, vec![&mut check, &mut switch_current], &mut cycles);
    let verdict = check.verdict();
    println!("max duty {max_duty}: {verdict}");
    for f in check.figures() {
        println!("  {f}");
    }
    let peak = cycles.iter().map(|r| r.duty).fold(0.0, f64::max);
    (verdict, peak, switch_current.result().unwrap().max)
}

#[test]
fn clamp_above_the_reset_limit_fails_during_start_up_and_names_the_cycle() {
    let limit = reset_winding_duty_limit(NR / 12.0);
    let (v, peak, _) = start_up(0.45);
    assert!(
        peak > limit,
        "start-up never passed the reset limit (largest duty {peak})"
    );
    assert!(!v.passed(), "the check passed: {v}");
    let first = v.first_failure.unwrap();
    assert_eq!(first.worst.0, Criterion::ResetIncomplete, "{v}");
    // Before any failure there is no residual flux, so the first cycle to fail must be
    // one whose own duty is beyond the closed-form limit (the diode and switch drops
    // only shorten the reset).
    assert!(
        first.record.duty > limit,
        "cycle {} failed at duty {} below the limit {limit}",
        first.record.index,
        first.record.duty
    );
    assert!(first.record.reset_incomplete);
}

#[test]
fn clamp_below_the_reset_limit_passes_with_the_closed_form_margin() {
    let nr_np = NR / 12.0;
    let limit = reset_winding_duty_limit(nr_np);
    let max_duty = 0.38;
    let (v, peak, i_sw) = start_up(max_duty);
    assert!(v.passed(), "{v}");
    assert!(
        peak > 0.99 * max_duty,
        "start-up never reached the clamp (largest duty {peak}); nothing was tested"
    );
    // The tightest cycle runs at the clamp; its reset margin is 1 − D·(1 + Nr/Np) of
    // the period by the closed form, which takes the same voltage across the core in
    // both intervals. Here the on-state voltage is Vin less the switch drop and the
    // reset voltage Vin plus the reset diode's drop, so the reset is shorter by the
    // factor k = (Vin − i_sw·R_on)/(Vin + Vf + Rd·i_r) at worst (highest currents):
    // the measured margin lies between the closed form (less one event resolution)
    // and the closed form plus (1 − k)·(Nr/Np)·D.
    let w = v.worst.unwrap();
    assert!(matches!(w.worst.0, Criterion::ResetMargin), "{v}");
    let d = w.record.duty;
    let closed_form = 1.0 - d * (1.0 + nr_np);
    let measured = w.reset_margin.unwrap();
    let design = demo_design();
    let vin = design.input.voltage;
    let reset_diode = match &design.reset {
        stepflux_models::template::ResetScheme::ResetWinding { diode } => diode,
        _ => unreachable!("the demo has a reset winding"),
    };
    let i_reset = w.record.mag_current_peak / nr_np;
    let k = (vin - i_sw * design.switch.r_on) / (vin + reset_diode.vf + reset_diode.rd * i_reset);
    let upper = closed_form + (1.0 - k) * nr_np * d;
    println!(
        "tightest cycle: duty {d}, margin {measured:.5} of T, closed form {closed_form:.5} \
         (upper bound {upper:.5}, switch current up to {i_sw:.3} A), limit {limit}"
    );
    assert!(measured >= closed_form - 1e-6 && measured <= upper);
}
