//! `stepflux size` through the binary: a specification in, a complete scenario out
//! that `check` accepts and that, simulated, regulates to its output voltage within
//! 1 % and keeps its ripple under the target it was sized for.
//!
//! Sizing relations: Erickson & Maksimović, Fundamentals of Power Electronics (2nd
//! ed.), forward converter §6.3.2, output ripple §2.2/§2.5, voltage-mode compensator
//! §9.5.4 (see models/src/sizing.rs). The 1 % is the acceptance: the loop's
//! integrator removes the steady error, so only the divider, the reference and the
//! sampled mean can move it; the ripple target is the one the capacitor was sized for.

use std::path::Path;

mod common;
use common::{scratch, stepflux};

fn figure(summary: &serde_json::Value, name: &str) -> f64 {
    summary["measurements"]
        .as_array()
        .expect("measurements")
        .iter()
        .find(|m| m["name"] == name)
        .and_then(|m| m["value"].as_f64())
        .unwrap_or_else(|| panic!("{name} measured"))
}

/// Sizes `args`, checks, runs and returns the run's summary.
fn size_and_run(dir: &Path, name: &str, args: &[&str]) -> serde_json::Value {
    let file = dir.join(format!("{name}.json"));
    let out = stepflux()
        .arg("size")
        .args(args)
        .arg("-o")
        .arg(&file)
        .output()
        .expect("binary runs");
    let text = String::from_utf8_lossy(&out.stdout);
    assert_eq!(
        out.status.code(),
        Some(0),
        "size then check passes: {text}\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(text.contains("design: PASS by its paper figures"), "{text}");
    let scenario: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&file).expect("written")).expect("JSON");
    let notes = scenario["design_notes"].as_object().expect("design notes");
    for field in [
        "converter.transformer.primary_turns",
        "converter.transformer.magnetising_inductance",
        "converter.output_inductor.inductance",
        "converter.output_capacitor.capacitance",
        "drive.controller.voltage_loop.compensation.poles_zeros",
    ] {
        assert!(notes.contains_key(field), "{field} explained");
    }
    let run = stepflux()
        .args(["run", "--quiet", "--out"])
        .arg(dir.join("out"))
        .arg(&file)
        .output()
        .expect("binary runs");
    let summary_path = dir.join("out").join(name).join("summary.json");
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&summary_path).expect("summary"))
            .expect("JSON");
    assert_eq!(
        run.status.code(),
        Some(0),
        "sized design passes its limits: {}",
        serde_json::to_string_pretty(&summary["verdicts"]).unwrap_or_default()
    );
    summary
}

#[test]
fn a_sized_reset_winding_design_meets_its_output_and_ripple() {
    let dir = scratch("size_48_5");
    let s = size_and_run(
        &dir,
        "sized-48v-5v",
        &[
            "--vin",
            "36V..72V",
            "--vout",
            "5V",
            "--iout",
            "4A",
            "--frequency",
            "150kHz",
            "--reset",
            "reset-winding",
            "--ripple",
            "50mV",
        ],
    );
    let v = figure(&s, "out.v.mean");
    assert!(
        (v - 5.0).abs() <= 0.01 * 5.0,
        "output {v} V within 1 % of 5 V"
    );
    let ripple = figure(&s, "out.v.ripple_pp");
    assert!(ripple <= 0.05, "ripple {ripple} V ≤ 50 mV");
}

#[test]
fn a_sized_two_switch_design_meets_its_output_and_ripple() {
    let dir = scratch("size_24_12");
    let s = size_and_run(
        &dir,
        "sized-24v-12v",
        &[
            "--vin",
            "20V..28V",
            "--vout",
            "12V",
            "--iout",
            "2A",
            "--frequency",
            "200kHz",
            "--reset",
            "two-switch",
        ],
    );
    let v = figure(&s, "out.v.mean");
    assert!(
        (v - 12.0).abs() <= 0.01 * 12.0,
        "output {v} V within 1 % of 12 V"
    );
    let ripple = figure(&s, "out.v.ripple_pp");
    // Default target: 1 % of the output voltage.
    assert!(ripple <= 0.12, "ripple {ripple} V ≤ 120 mV");
}

#[test]
fn a_scheme_that_sizing_does_not_know_is_bad_input() {
    let dir = scratch("size_bad");
    let out = stepflux()
        .args([
            "size",
            "--vin",
            "36V..72V",
            "--vout",
            "5V",
            "--iout",
            "4A",
            "--frequency",
            "150kHz",
            "--reset",
            "rcd-clamp",
            "-o",
        ])
        .arg(dir.join("x.json"))
        .output()
        .expect("binary runs");
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("rcd-clamp"));
}
