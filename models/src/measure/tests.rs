//! The measurements on synthetic streams whose answers are known in closed form.

use stepflux_engine::{Quantity, Signal, Sink};

use super::*;
use crate::cycles::CycleRecord;
use crate::demo_design::demo_design;
use crate::template::Probe;

fn probes(names: &[&str]) -> Vec<Probe> {
    names
        .iter()
        .map(|n| Probe {
            name: n.to_string(),
            signal: Signal::of(Quantity::One),
            unit: "V",
        })
        .collect()
}

/// Counts what reaches the inner sink.
struct Count(usize);

impl Sink for Count {
    fn sample(&mut self, _t: f64, _v: &[f64], _e: bool) -> Result<(), String> {
        self.0 += 1;
        Ok(())
    }
}

fn record(index: usize, duty: f64) -> CycleRecord {
    CycleRecord {
        index,
        start: index as f64 * 1e-5,
        period: 1e-5,
        duty,
        mag_current_start: 0.0,
        mag_current_peak: 0.2,
        reset_end: Some(index as f64 * 1e-5 + 0.8e-5),
        reset_incomplete: false,
        drain_start: 24.0,
        drain_peak: 48.0,
        b_peak: 0.1,
    }
}

#[test]
fn ripple_of_a_triangle_sampled_at_its_corners_is_exact() {
    // The trapezoidal rule is exact for piecewise-linear functions (R. L. Burden &
    // J. D. Faires, Numerical Analysis, §4.3 (from memory)); a triangle between 1 and
    // 3 has mean 2 and peak-to-peak 2. The window starts mid-segment, so the edge
    // interpolation is exercised too.
    let p = probes(&["out.v"]);
    let mut r = Ripple::new(&p, "out.v", 0.5, 10.5).unwrap();
    let mut inner = Count(0);
    {
        let tee = Tee::new(vec![&mut r]);
        let mut s = tee.samples(&mut inner);
        for k in 0..=12 {
            let v = if k % 2 == 0 { 1.0 } else { 3.0 };
            s.sample(k as f64, &[v], false).unwrap();
        }
    }
    assert_eq!(inner.0, 13, "the tee must forward every sample");
    let res = r.result().unwrap();
    assert!((res.mean - 2.0).abs() < 1e-12, "{res:?}");
    assert!((res.peak_to_peak - 2.0).abs() < 1e-12);
}

#[test]
fn start_up_interpolates_the_90_percent_crossing_and_sees_a_dip() {
    // v = 1 V/s·t crosses 4.5 V (90 % of 5 V) at 4.5 s; samples every second.
    let p = probes(&["out.v"]);
    let mut s = StartUp::new(&p, 5.0, 0.1, 0.0, 100.0).unwrap();
    for k in 0..8 {
        let t = k as f64;
        // A 0.3 V dip below the running maximum (2 V) at t = 3 s, deeper than the
        // 0.1 V allowance.
        let v = if k == 3 { 1.7 } else { t };
        s.sample(t, &[v], false);
    }
    s.cycle(&record(3, 0.4));
    s.cycle(&record(4, 0.3));
    let r = s.result().unwrap();
    assert!((r.t90.unwrap() - 4.5).abs() < 1e-12, "{r:?}");
    assert!(!r.monotonic && (r.max_dip - 0.3).abs() < 1e-12);
    assert!((r.overshoot - 2.0).abs() < 1e-12);
    assert_eq!(r.max_duty.map(|m| m.2), Some(3));
}

#[test]
fn step_recovery_is_the_last_entry_into_the_band() {
    // After the step at 1 s the output is 4.8 V, then rises 0.1 V/s: it enters the
    // ±1 % band (4.95 V) at 1 + 1.5 s; a later excursion is not seen, so that stands.
    let p = probes(&["out.v"]);
    let settings = step::StepSettings {
        label: "load".into(),
        step_time: 1.0,
        set_point: 5.0,
        band: 0.01,
        duty_window: 1.0,
        settle_from: 4.0,
        until: 6.0,
    };
    let mut s = StepResponse::new(&p, settings).unwrap();
    for k in 0..=12 {
        let t = 1.0 + 0.5 * k as f64;
        let v = (4.8 + 0.1 * (t - 1.0)).min(5.0);
        s.sample(t, &[v], false);
    }
    let r = s.result().unwrap();
    assert!((r.recovery.unwrap() - 1.5).abs() < 1e-12, "{r:?}");
    assert!((r.undershoot - 0.2).abs() < 1e-12);
    assert!(r.steady_error.unwrap().abs() < 1e-12);
}

#[test]
fn reset_check_names_the_failing_cycle_and_criterion() {
    let d = demo_design();
    let p = probes(&["rect.v", "fw.v", "reset.v"]);
    let mut c = ResetCheck::new(&d, &p, ResetLimits::for_design(&d)).unwrap();
    c.sample(0.0, &[-18.0, -18.0, -48.0], false);
    c.cycle(&record(0, 0.3));
    let mut bad = record(1, 0.45);
    bad.drain_peak = 120.0; // above the 100 V rating
    c.cycle(&bad);
    let mut worse = record(2, 0.5);
    worse.reset_incomplete = true;
    worse.reset_end = None;
    c.cycle(&worse);
    let v = c.verdict();
    assert_eq!((v.cycles, v.failed), (3, 2));
    let first = v.first_failure.unwrap();
    assert_eq!(first.record.index, 1);
    assert_eq!(first.worst.0, Criterion::DrainVoltage);
    assert!((first.worst.1 + 0.2).abs() < 1e-12);
    let worst = v.worst.unwrap();
    assert_eq!(
        (worst.record.index, worst.worst.0),
        (2, Criterion::ResetIncomplete)
    );
}

/// A set-point change from 5.0 to 5.2 V at 1 s, fed the output `v(t)` every 50 ms to
/// 4 s.
fn set_point_change(v: impl Fn(f64) -> f64) -> StepResult {
    let settings = step::StepSettings {
        label: "reference".into(),
        step_time: 1.0,
        set_point: 5.2,
        band: 0.01,
        duty_window: 1.0,
        settle_from: 3.5,
        until: 4.0,
    };
    let mut s = StepResponse::set_point_change(&probes(&["out.v"]), settings, 5.0).unwrap();
    for k in 0..=60 {
        let t = 1.0 + 0.05 * k as f64;
        s.sample(t, &[v(t)], false);
    }
    s.result().unwrap()
}

#[test]
fn a_set_point_change_is_judged_against_the_new_set_point() {
    // The output rises 0.2 V/s from 5.0 V to 5.26 V at 2.3 s, falls back at 0.2 V/s to
    // 5.18 V at 2.7 s and rises to 5.2 V. Against 5.2 V: overshoot 0.06 V; on the side
    // it came from only the 0.02 V dip after first reaching 5.2 V counts, not the 0.2 V
    // approach. The ±1 % band (±0.052 V) is last entered falling through 5.252 V at
    // 2.34 s, 1.34 s after the step. Straight segments: interpolation is exact.
    let r = set_point_change(|t| {
        if t <= 2.3 {
            5.0 + 0.2 * (t - 1.0)
        } else if t <= 2.7 {
            5.26 - 0.2 * (t - 2.3)
        } else {
            (5.18 + 0.2 * (t - 2.7)).min(5.2)
        }
    });
    assert!((r.overshoot - 0.06).abs() < 1e-9, "{r:?}");
    assert!((r.undershoot - 0.02).abs() < 1e-9, "{r:?}");
    assert!((r.recovery.unwrap() - 1.34).abs() < 1e-9, "{r:?}");
    assert!(r.steady_error.unwrap().abs() < 1e-9);

    // An output that stops at 5.1 V never reaches the new set point: its shortfall is
    // the deviation, and it never recovers into the band.
    let r = set_point_change(|t| (5.0 + 0.2 * (t - 1.0)).min(5.1));
    assert!((r.undershoot - 0.1).abs() < 1e-9, "{r:?}");
    assert_eq!(r.overshoot, 0.0);
    assert_eq!(r.recovery, None);
}

#[test]
fn the_last_cycle_cut_by_the_run_end_is_not_judged_on_its_reset() {
    // Two cycles of 10 µs; the run ends 6 µs into the second with its reset diode
    // still conducting: nothing failed. Told nothing, or told an end at the second
    // cycle's full period, the check counts the incomplete reset as before.
    let d = demo_design();
    let p = probes(&[]);
    let mut cut = record(1, 0.3);
    cut.reset_incomplete = true;
    cut.reset_end = None;
    let judged = |end: Option<f64>| {
        let mut c = ResetCheck::new(&d, &p, ResetLimits::for_design(&d)).unwrap();
        c.cycle(&record(0, 0.3));
        c.cycle(&cut);
        if let Some(t) = end {
            c.end_of_run(t);
        }
        (c.verdict(), c.last_cycle_cut())
    };
    let (v, was_cut) = judged(Some(1.6e-5));
    assert!(v.passed() && was_cut && v.cycles == 2, "{v}");
    let (v, was_cut) = judged(None);
    assert!(!v.passed() && !was_cut, "{v}");
    let (v, was_cut) = judged(Some(2.0e-5));
    assert!(!v.passed() && !was_cut, "{v}");
}
