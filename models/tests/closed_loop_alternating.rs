//! The alternating output mode never exceeds its configured maximum duty.
//!
//! Specification: in the alternating mode each output switches at half the clock
//! frequency and is limited to `max_duty` of its own period; 0.45 is the usual cap of
//! this mode (common practice), leaving each output dead time before the other's
//! pulse. The demo converter is run with the clock doubled to 300 kHz (each output at
//! the design's 150 kHz), at low line (18 V, where regulation needs a duty near 0.41)
//! with a fast soft start, through start-up and a 4 → 6 A load step: both drive the
//! error amplifier to its rail, so the clamp is what ends the pulses.
//!
//! Every cycle record is checked (period and duty). The duty tolerance is one time
//! quantum of the engine's grid over the period (≈ 1e-9): a pulse that ends on the
//! comparator event is located to the first grid tick after the crossing. The test also
//! requires the clamp to have been reached (the largest duty within 0.5 % of it),
//! otherwise it would pass without testing anything.

mod closed_loop_rig;

use closed_loop_rig::*;
use stepflux_models::controller::OutputMode;
use stepflux_models::demo_design::{demo_controller, demo_design, DEMO_FREQUENCY};
use stepflux_models::disturbance::Disturbance;
use stepflux_models::measure::{Measurement, StartUp, StepResponse, StepSettings};

#[test]
fn alternating_mode_never_exceeds_its_maximum_duty() {
    let mut design = demo_design();
    design.input.voltage = 18.0;
    let mut spec = demo_controller();
    spec.mode = OutputMode::Alternating;
    spec.oscillator.frequency = 2.0 * DEMO_FREQUENCY;
    spec.max_duty = 0.45;
    spec.soft_start = 0.3e-3;
    spec.voltage_loop.reference_soft_start = 0.0;
    let set_point = spec.voltage_loop.set_point();
    let (t_step, t_end) = (3e-3, 4.5e-3);
    let step = Disturbance::LoadCurrent {
        time: t_step,
        to: 2.0,
        slew: 1e6,
    };
    let mut rig = Rig::new(&design, &spec, &[step], 1e-6);
    let probes = rig.cl.run.probes().to_vec();
    let mut startup = StartUp::new(&probes, set_point, 0.05, 0.0, t_step).unwrap();
    let mut load = StepResponse::new(
        &probes,
        StepSettings {
            label: "load_step".into(),
            step_time: t_step,
            set_point,
            band: 0.01,
            duty_window: 0.2e-3,
            settle_from: t_end - 0.2e-3,
            until: t_end,
        },
    )
    .unwrap();
    let mut cycles = Vec::new();
    rig.run(t_end, vec![&mut startup, &mut load], &mut cycles);
    for f in startup.figures().iter().chain(&load.figures()) {
        println!("{f}");
    }

    let output_period = 1.0 / DEMO_FREQUENCY;
    let quantum = rig.cl.run.sim.grid().quantum;
    let tolerance = quantum / output_period;
    assert!(cycles.len() > 500, "only {} cycles", cycles.len());
    for r in &cycles {
        assert!(
            (r.period - output_period).abs() < 1e-12 * output_period,
            "cycle {} has period {} s, not the output period {output_period} s",
            r.index,
            r.period
        );
        assert!(
            r.duty <= spec.max_duty + tolerance,
            "cycle {} at {} s has duty {} above the maximum {}",
            r.index,
            r.start,
            r.duty,
            spec.max_duty
        );
    }
    let peak = cycles.iter().map(|r| r.duty).fold(0.0, f64::max);
    let after_step = cycles
        .iter()
        .filter(|r| r.start >= t_step)
        .map(|r| r.duty)
        .fold(0.0, f64::max);
    println!(
        "largest duty {peak}, after the step {after_step}, {} cycles",
        cycles.len()
    );
    assert!(
        peak > 0.995 * spec.max_duty,
        "the clamp was never reached (largest duty {peak}): the test exercised nothing"
    );
}
