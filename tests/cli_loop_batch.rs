//! A study over line and load corners and Monte Carlo draws of the output capacitor,
//! with a phase-margin limit: every case computes the sampled-data margins at its
//! steady state, worst.json reports the smallest phase margin and the case it came
//! from, and each case is judged against the limit (issue 14: "a batch reports the
//! worst phase margin over its corners and Monte Carlo draws").

mod common;

use common::*;
use serde_json::{json, Value};

/// Each case's phase margin and whether its phase-margin verdict passed.
fn phase_margins(results: &Value) -> Vec<(String, f64, bool)> {
    results["cases"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| {
            let pm = c["measurements"]["loop.phase_margin_deg"]
                .as_f64()
                .unwrap_or_else(|| panic!("no phase margin in {c}"));
            let v = c["verdicts"]
                .as_array()
                .unwrap()
                .iter()
                .find(|v| v["limit"] == "phase_margin_degrees")
                .unwrap_or_else(|| panic!("no phase-margin verdict in {c}"));
            (
                c["id"].as_str().unwrap().to_string(),
                pm,
                v["pass"].as_bool().unwrap(),
            )
        })
        .collect()
}

#[test]
fn a_study_reports_the_worst_phase_margin_and_judges_the_limit() {
    let root = scratch("cli_loop_batch");
    let mut study = quick_study("loop-worst");
    // A short run: the margins come from the steady state, not from the waveform.
    study["corners"]["stop"] = json!(["0.2 ms"]);
    study["monte_carlo"]["samples"] = json!(2);
    // Between the corners' margins (measured 44.3° at 28 V, 2.5 Ω to 50.5° at
    // 20 V, 1.25 Ω), so some cases pass and
    // some fail: the verdict must follow each case's own margin.
    study["limits"] = json!({ "phase_margin_degrees": 49.0 });
    let path = write_study(&root, &study);
    let out = batch(&path, &root.join("out"), &["--jobs", "2"]);
    // A failing case is an answer (exit 1), not an error.
    assert_eq!(code(&out, &[1]), 1);
    let dir = root.join("out/loop-worst");
    let pms = phase_margins(&results(&dir));
    assert_eq!(pms.len(), 8, "2 lines × 2 loads × 2 draws");
    for (id, pm, pass) in &pms {
        assert_eq!(*pass, *pm >= 49.0, "{id}: {pm}° judged {pass}");
    }
    assert!(
        pms.iter().any(|p| p.2) && pms.iter().any(|p| !p.2),
        "{pms:?}"
    );
    let (id, min) = pms.iter().map(|(id, pm, _)| (id.clone(), *pm)).fold(
        (String::new(), f64::INFINITY),
        |a, b| if b.1 < a.1 { b } else { a },
    );
    let worst: Value = serde_json::from_str(&tables(&dir)[2]).unwrap();
    let w = &worst["measurements"]["loop.phase_margin_deg"];
    assert_eq!(w["worst"], "min", "{w}");
    assert_eq!(w["value"].as_f64().unwrap(), min);
    assert_eq!(w["case"].as_str().unwrap(), id);
    assert_eq!(w["unit"], "°");
    // The peak output impedance is judged the other way: its worst is the largest.
    let z = &worst["measurements"]["loop.peak_output_impedance"];
    assert_eq!(z["worst"], "max", "{z}");
}
