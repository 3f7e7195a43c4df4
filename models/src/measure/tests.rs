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
