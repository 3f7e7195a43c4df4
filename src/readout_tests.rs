//! The readout says why a check failed in one line. Expected texts follow the issue's
//! wording ("core reset FAIL: drain 808 V > rating 100 V at cycle 12, t = 80.0 µs");
//! numbers are three significant digits (src/eng.rs), so strings compare exactly.

use super::*;
use crate::summary::{Figure, CAUTION};
use stepflux_models::job::verdict::find_limit;
use stepflux_models::measure::{catalogue, Value};

/// A figure by key as a run would report it, found in the catalogue.
fn figure(key: &str, value: impl Into<Value>) -> Figure {
    let def = catalogue::find(key).unwrap_or_else(|| panic!("{key} is not declared"));
    let mut f = def.of_key(key, value);
    f.unit = if def.unit == "*" { "V" } else { def.unit };
    f
}

fn summary(measurements: Vec<Figure>, verdicts: Vec<Verdict>) -> Summary {
    Summary {
        scenario: "case".into(),
        tool: "stepflux test".into(),
        run_time_s: 0.27,
        simulated_time_s: 10e-3,
        samples: 0,
        design: Vec::new(),
        measurements,
        verdicts,
        passed: false,
        stopped: None,
        error: None,
        interrupted: None,
        steady_state: None,
        caution: CAUTION,
    }
}

/// A drain peak of 808 V whose margin is (100 − 808)/100 = −7.08 against a derated
/// rating of 100 V: the line names the criterion, both voltages, cycle and time.
#[test]
fn a_failed_reset_check_says_why_in_one_line() {
    let p = "reset_check.first_failure";
    let s = summary(
        vec![
            figure("reset_check.pass", false),
            figure("reset_check.cycles", 40.0),
            figure("reset_check.failed_cycles", 29.0),
            figure(&format!("{p}.cycle"), 12.0),
            figure(&format!("{p}.time"), 80e-6),
            figure(&format!("{p}.criterion"), "drain_voltage"),
            figure(&format!("{p}.criterion_margin"), -7.08),
            figure(&format!("{p}.drain_peak"), 808.0),
        ],
        Vec::new(),
    );
    let r = readout(&s);
    assert_eq!(
        r.verdicts,
        vec![Line {
            mark: Mark::Fail,
            text: "core reset FAIL: drain 808 V > derated rating 100 V at cycle 12, \
                   t = 80.0 µs (29 of 40 cycles fail)"
                .into()
        }]
    );
    assert!(r
        .headline
        .starts_with("case: FAIL — 40 cycles, 10.0 ms simulated in 270 ms"));
}

/// A limit that holds shows value, bound and margin in the limit's unit; one that
/// fails shows value against limit.
#[test]
fn limits_read_value_against_bound_with_units() {
    let v = |limit: &str, value, bound, pass| Verdict {
        limit: find_limit(limit).expect("a declared limit"),
        value: Some(value),
        bound,
        pass,
        reason: None,
    };
    let s = summary(
        Vec::new(),
        vec![
            v("ripple_pp", 0.0333, 0.05, true),
            v("step_recovery", 310e-6, 200e-6, false),
            v("reset_margin_pct", 11.7, 5.0, true),
        ],
    );
    let texts: Vec<String> = readout(&s).verdicts.into_iter().map(|l| l.text).collect();
    assert_eq!(
        texts,
        [
            "output ripple 33.3 mV ≤ 50.0 mV (margin 16.7 mV)",
            "step recovery 310 µs > limit 200 µs",
            "reset margin 11.7 % ≥ 5.00 % (margin 6.70 %)",
        ]
    );
}

/// A start-up that falls back before 90 % is called out, with the dip and the
/// allowance the measurement used.
#[test]
fn a_start_up_that_is_not_monotonic_says_so() {
    let s = summary(
        vec![
            figure("startup.monotonic", false),
            figure("startup.max_dip_before_t90", 0.602),
            figure("startup.dip_allowance", 0.05),
        ],
        Vec::new(),
    );
    let r = readout(&s);
    assert_eq!(r.verdicts.len(), 1);
    assert_eq!(r.verdicts[0].mark, Mark::Warn);
    assert_eq!(
        r.verdicts[0].text,
        "start-up not monotonic: the output falls back 602 mV before reaching 90 % \
         (allowance 50.0 mV)"
    );
}
