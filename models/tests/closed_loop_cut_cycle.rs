//! A run's last cycle cut by the run's end is not a failed reset, and a run ends at its
//! stop time exactly, through the clock period that time cuts.
//!
//! Specification: a cycle runs from one turn-on to the next; whether its reset
//! completed can only be known at the next turn-on. When the run stops inside the
//! cycle, with the reset diode still conducting, nothing failed: the reset check must
//! not count it (and must still count a cycle cut off by a real turn-on).
//!
//! The case: the demo at 18 V in the alternating mode with the clock doubled to
//! 300 kHz (each output at 150 kHz, 45 % of its own period), as
//! `closed_loop_alternating.rs`. Output A's pulse takes up to 0.9 of a clock period and
//! its reset, with Nr = Np, as long again (R. W. Erickson & D. Maksimović,
//! *Fundamentals of Power Electronics*, 2nd ed., §6.3.2), so at the end of the first
//! clock period of an A cycle the reset diode is still conducting. A run of an odd
//! number of clock periods ends there.

mod closed_loop_rig;

use closed_loop_rig::*;
use stepflux_engine::NullSink;
use stepflux_models::controller::OutputMode;
use stepflux_models::cycles::CycleRecord;
use stepflux_models::demo_design::{demo_controller, demo_design, DEMO_FREQUENCY};
use stepflux_models::measure::{Measurement, ResetCheck, ResetLimits, Tee};

/// Runs `clocks` clock periods plus `extra` seconds; returns the check (told the run's
/// end when `tell_end`), the records and the time reached.
fn run(clocks: f64, extra: f64, tell_end: bool) -> (ResetCheck, Vec<CycleRecord>, f64) {
    let mut design = demo_design();
    design.input.voltage = 18.0;
    let mut spec = demo_controller();
    spec.mode = OutputMode::Alternating;
    spec.oscillator.frequency = 2.0 * DEMO_FREQUENCY;
    spec.max_duty = 0.45;
    spec.soft_start = 0.3e-3;
    spec.voltage_loop.reference_soft_start = 0.0;
    let t_end = clocks / spec.oscillator.frequency + extra;
    let mut rig = Rig::new(&design, &spec, &[], 1e-6);
    let probes = rig.cl.run.probes().to_vec();
    let mut check = ResetCheck::new(&design, &probes, ResetLimits::for_design(&design)).unwrap();
    let mut cycles = Vec::new();
    {
        let tee = Tee::new(vec![&mut check as &mut dyn Measurement]);
        let mut null = NullSink;
        let mut samples = tee.samples(&mut null);
        let mut records = tee.cycles(&mut cycles);
        rig.cl
            .advance_to_end(t_end, &mut samples, &mut records)
            .unwrap();
        rig.cl.finish(&mut records);
    }
    let reached = rig.cl.run.sim.time();
    if tell_end {
        check.end_of_run(reached);
    }
    (check, cycles, reached)
}

#[test]
fn a_last_cycle_cut_by_the_end_of_the_run_is_not_a_failed_reset() {
    // 301 clock periods: the last A cycle started at clock 300 and is half done.
    let (check, cycles, _) = run(301.0, 0.0, true);
    let last = cycles.last().unwrap();
    assert!(
        last.reset_incomplete,
        "the last record's reset had ended ({last:?}): the test exercises nothing"
    );
    assert!(check.last_cycle_cut());
    let v = check.verdict();
    assert!(v.passed(), "{v}");
    assert_eq!(v.cycles, cycles.len());

    // The same run judged without knowing where it ended counts the cut cycle as a
    // failed reset: that was the false verdict.
    let (blind, _, _) = run(301.0, 0.0, false);
    assert!(!blind.verdict().passed());
    assert_eq!(blind.verdict().failed, 1);

    // A run that ends on a whole output period has nothing cut and passes as well.
    let (whole, _, _) = run(302.0, 0.0, true);
    assert!(whole.verdict().passed(), "{}", whole.verdict());
}

#[test]
fn a_run_ends_at_its_stop_time_inside_a_clock_period() {
    // Stop 1.3 µs into clock period 301: the run must reach that instant, to within
    // the time grid's rounding, below the event resolution max(1e-9·period, 1 ps)
    // (`SimOptions::for_period`), which is 1 ps here.
    let extra = 1.3e-6;
    let t_end = 301.0 / (2.0 * DEMO_FREQUENCY) + extra;
    let (_, cycles, reached) = run(301.0, extra, true);
    assert!(
        (reached - t_end).abs() <= 1e-12,
        "ended at {reached} s, not at the stop time {t_end} s"
    );
    // Clock 301 is a B period: the last record is still the A cycle of clock 300.
    let last = cycles.last().unwrap();
    let clock = last.start * 2.0 * DEMO_FREQUENCY;
    assert!(
        (299.9..300.1).contains(&clock),
        "last cycle opened at clock {clock}"
    );
}
