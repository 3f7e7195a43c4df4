//! A case whose values make its scenario invalid is recorded as errored and the other
//! cases complete; an invalid study is refused before anything runs. Specification:
//! issue 6 (error isolation, exit codes 1 / 3 / 2 as in README "Exit codes").

mod common;

use common::*;
use serde_json::json;

#[test]
fn an_invalid_case_is_isolated_and_the_batch_goes_on() {
    let root = scratch("batch_errors");
    let mut s = quick_study("errors");
    // A negative capacitance cannot be built; the scenario loader refuses it.
    s["corners"]["cout"] = json!(["220 uF", -1e-6]);
    s.as_object_mut().unwrap().remove("monte_carlo");
    let study = write_study(&root, &s);
    let out = batch(&study, &root.join("out"), &["--jobs", "2"]);
    assert_eq!(
        code(&out, &[3]),
        3,
        "an errored case wins over a failed limit"
    );
    let r = results(&root.join("out/errors"));
    let cases = r["cases"].as_array().unwrap();
    assert_eq!(cases.len(), 8);
    for c in cases {
        let bad = c["parameters"]["cout"].as_f64().unwrap() < 0.0;
        if bad {
            assert_eq!(c["status"], "errored", "{c}");
            let e = c["error"].as_str().unwrap();
            assert!(e.contains("output_capacitor"), "error names the field: {e}");
            assert_eq!(c["measurements"], json!({}));
        } else {
            assert_ne!(c["status"], "errored", "{c}");
            assert!(c["measurements"]["out.v.max"].as_f64().unwrap() > 0.0);
        }
    }
    assert_eq!(r["counts"]["errored"], 4);
    // The worst-case table ignores errored cases.
    let worst: serde_json::Value =
        serde_json::from_str(&tables(&root.join("out/errors"))[2]).unwrap();
    for (name, w) in worst["measurements"].as_object().unwrap() {
        assert_ne!(w["status"], "errored", "{name}");
    }
}

#[test]
fn an_invalid_study_is_refused_with_exit_2() {
    let root = scratch("batch_bad_study");
    let cases = [
        ("unknown parameter", json!({"corners": {"nope": [1]}})),
        (
            "path to nothing",
            json!({"parameters": {"vin": "converter.nothing.voltage"}}),
        ),
        (
            "unit mismatch",
            json!({"corners": {"vin": ["20 uH", "28 V"]}}),
        ),
        ("empty corner", json!({"corners": {"vin": []}})),
        (
            "unused parameter",
            json!({"parameters": {"extra": "converter.input.voltage"}}),
        ),
    ];
    for (what, patch) in cases {
        let mut s = quick_study("bad");
        for (k, v) in patch.as_object().unwrap() {
            for (k2, v2) in v.as_object().unwrap() {
                s[k][k2] = v2.clone();
            }
        }
        let study = write_study(&root, &s);
        let out = root.join("out");
        let o = batch(&study, &out, &[]);
        assert_eq!(code(&o, &[2]), 2, "{what}");
        assert!(!out.join("bad").exists(), "{what}: nothing written");
    }
}
