//! Verdicts that depend only on the circuit, through the binary: the run ends at its
//! stop time, a load-resistance step recovers and leaves the ripple alone, a reference
//! step is judged against the new set point, and a design beyond its reset limit is
//! simulated and shown failing (README "Exit codes": 1) rather than refused.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use serde_json::{json, Value};

const LOAD_STEP: &str = include_str!("../scenarios/demo-load-step.json");
const STARTUP: &str = include_str!("../scenarios/demo-startup.json");

fn scratch(name: &str) -> PathBuf {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR"))
        .join("verdicts")
        .join(name);
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("scratch dir");
    dir
}

/// Writes `scenario` under `name` and runs `stepflux <command>` on it.
fn stepflux(command: &str, name: &str, mut scenario: Value) -> (Output, PathBuf) {
    let dir = scratch(name);
    scenario["name"] = json!(name);
    let file = dir.join(format!("{name}.json"));
    std::fs::write(&file, scenario.to_string()).expect("write scenario");
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_stepflux"));
    cmd.arg(command);
    if command == "run" {
        cmd.args(["--quiet", "--out"]).arg(dir.join("out"));
    }
    let out = cmd.arg(&file).output().expect("binary runs");
    (out, dir.join("out").join(name))
}

fn summary(run: &Path) -> Value {
    let text = std::fs::read_to_string(run.join("summary.json")).expect("summary.json");
    serde_json::from_str(&text).expect("summary parses")
}

fn figure(s: &Value, name: &str) -> Option<f64> {
    s["measurements"]
        .as_array()?
        .iter()
        .find(|f| f["name"] == name)?["value"]
        .as_f64()
}

fn verdict(s: &Value, limit: &str) -> Value {
    s["verdicts"]
        .as_array()
        .and_then(|v| v.iter().find(|x| x["limit"] == limit).cloned())
        .unwrap_or(Value::Null)
}

fn load_step() -> Value {
    serde_json::from_str(LOAD_STEP).expect("demo-load-step parses")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

#[test]
fn a_run_with_events_ends_at_its_stop_time() {
    // 7 ms used to end at 6.960 ms: the last progress slice, 7 ms·200/200, rounds one
    // ulp above 7 ms and was dropped. 6.5432 ms is no whole number of 150 kHz periods:
    // the run goes on through the period it cuts. Tolerance: the time grid's rounding,
    // below its 1 ps event resolution.
    for (name, stop) in [("stop-7ms", 7e-3), ("stop-odd", 6.5432e-3)] {
        let mut s = load_step();
        s["analysis"]["stop_time"] = json!(stop);
        let (out, run) = stepflux("run", name, s);
        assert_eq!(out.status.code(), Some(0), "{name}: {}", stderr(&out));
        let simulated = summary(&run)["simulated_time_s"].as_f64().unwrap();
        assert!(
            (simulated - stop).abs() <= 1e-12,
            "{name}: ended at {simulated} s"
        );
    }
}

#[test]
fn a_load_resistance_step_recovers_and_leaves_the_steady_ripple_alone() {
    // The same 4 → 6 → 4 A steps as demo-load-step, made by the load resistor:
    // 1.25 Ω → 0.8333 Ω at 5 ms, back to 1.25 Ω at 6 ms (5 V / R).
    let mut by_r = load_step();
    by_r["disturbances"] = json!([
        { "load_resistance": { "time": "5 ms", "to": 0.8333333333333334 } },
        { "load_resistance": { "time": "6 ms", "to": "1R25" } }
    ]);
    let (out, run) = stepflux("run", "load-r", by_r);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let r = summary(&run);
    let (_, run_i) = stepflux("run", "load-i", load_step());
    let i = summary(&run_i);
    // Before the first step both circuits are the same converter (the step's branch
    // is off at 1 TΩ), so the steady-window ripple is the same: the window ends before
    // the step. 1 µV covers the off branch. Recovery used to be "never" and the ripple
    // 80 mV higher: for one instant between switching the old load off and the new
    // one on, no load at all put the inductor current through the 20 mΩ ESR (4 A ×
    // 20 mΩ = 80 mV, 1.6 % of the set point), sampled as a real state.
    let ripple = |s: &Value| figure(s, "out.v.ripple_pp").unwrap();
    assert!(
        (ripple(&r) - ripple(&i)).abs() < 1e-6,
        "{} vs {}",
        ripple(&r),
        ripple(&i)
    );
    for k in 0..2 {
        let rec = figure(&r, &format!("load_step{k}.recovery"));
        let rec = rec.unwrap_or_else(|| panic!("load_step{k} never recovered"));
        // The scenario's own limit, 200 µs, which the current steps meet.
        assert!(rec < 200e-6, "load_step{k} recovery {rec} s");
    }
    // Raising the load cannot lift the output by the 1.6 % spike of no load.
    let over = figure(&r, "load_step0.overshoot_pct").unwrap();
    assert!(over < 1.0, "load_step0 overshoot {over} %");
    assert_eq!(verdict(&r, "step_recovery")["pass"], json!(true));
}

#[test]
fn a_reference_step_is_judged_against_the_new_set_point() {
    // Reference 2.5 → 2.6 V at 5 ms: the set point moves from 5.0 to 2.6·(1 + 10k/10k)
    // = 5.2 V (the divider is unchanged). The output must settle there: steady error
    // within the ±1 % band, and the step limits judged on this step, not "-".
    let mut s = load_step();
    s["disturbances"] = json!([
        { "reference": { "time": "5 ms", "to": "2.6 V" } },
        { "load_current": { "time": "6 ms", "to": "2 A", "slew": "1 A/us" } }
    ]);
    let (out, run) = stepflux("run", "ref-step", s);
    let s = summary(&run);
    assert_eq!(out.status.code(), Some(0), "{}\n{s:#}", stderr(&out));
    let err = figure(&s, "reference_step0.steady_error").unwrap();
    assert!(err.abs() < 0.01 * 5.2, "steady error {err} V about 5.2 V");
    // The load step after it is judged against 5.2 V too.
    let err = figure(&s, "load_step1.steady_error").unwrap();
    assert!(
        err.abs() < 0.01 * 5.2,
        "load step steady error {err} V about 5.2 V"
    );
    for limit in ["step_deviation_pct", "step_recovery"] {
        assert!(verdict(&s, limit)["value"].is_number(), "{limit}: {s:#}");
    }
}

/// The demo stage with Nr = 1.5·Np at D = 0.45, open loop: beyond the reset limit
/// 1/(1 + 1.5) = 0.40 (Erickson & Maksimović, §6.3.2).
fn beyond_reset_limit(stop: &str, saturated: Option<&str>) -> Value {
    let mut s: Value = serde_json::from_str(STARTUP).expect("demo-startup parses");
    s["converter"]["reset"]["reset_winding"]["turns"] = json!(18);
    if let Some(l) = saturated {
        s["converter"]["transformer"]["saturated_inductance"] = json!(l);
    }
    s["drive"] = json!({ "open_loop": { "frequency": "150 kHz", "duty": 0.45 } });
    s["analysis"]["stop_time"] = json!(stop);
    s["limits"] = json!({ "flux_margin_pct": 20 });
    s
}

#[test]
fn a_design_beyond_its_reset_limit_fails_at_check_and_is_simulated_by_run() {
    let (out, _) = stepflux("check", "beyond-limit", beyond_reset_limit("0.2 ms", None));
    let text = String::from_utf8_lossy(&out.stdout);
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    // ΔI = 24 V·6.667 µs·(0.45 − 0.55/1.5)/200 µH = 0.0667 A per cycle, without the
    // diode drop (the check's closed form); knee 0.72 A.
    for key in [
        "design: FAIL",
        "drive.open_loop.duty: duty 0.45 is above the reset_winding reset limit 0.4000",
        "grows by 0.0667 A per cycle",
        "knee current 0.720 A",
    ] {
        assert!(text.contains(key), "missing {key:?} in:\n{text}");
    }
    let (out, run) = stepflux("run", "beyond-limit", beyond_reset_limit("0.2 ms", None));
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    let s = summary(&run);
    assert_eq!(figure(&s, "reset_check.first_failure.cycle"), Some(0.0));
    assert!(
        figure(&s, "reset_check.bsat_crossed.cycle").is_some(),
        "{s:#}"
    );
    assert!(figure(&s, "reset_check.first_failure.drain_peak").is_some());
    assert!(s["error"].is_null() && s["stopped"].is_null(), "{s:#}");
}

#[test]
fn a_core_that_runs_away_stops_the_run_as_a_design_failure() {
    // A 20 µH saturated inductance: past the knee the walk is ten times steeper, and
    // the guard stops the run once the magnetising current passes 10 × 0.72 A.
    let (out, run) = stepflux("run", "runaway", beyond_reset_limit("2 ms", Some("20 uH")));
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    let s = summary(&run);
    let why = s["stopped"]
        .as_str()
        .unwrap_or_else(|| panic!("not stopped: {s:#}"));
    assert!(
        why.contains("core runaway") && why.contains("knee current 0.720 A"),
        "{why}"
    );
    assert!(s["simulated_time_s"].as_f64().unwrap() < 2e-3);
    assert!(s["error"].is_null());
}

#[test]
fn a_drain_stress_above_the_rating_is_a_design_failure_at_check() {
    // Drain plateau Vin·(1 + Np/Nr) = 48 V against a 40 V rating (Erickson &
    // Maksimović §6.3.2): the switch fails, which a run can show; not bad input.
    let mut s: Value = serde_json::from_str(STARTUP).expect("demo-startup parses");
    s["converter"]["switch"]["voltage_rating"] = json!("40 V");
    let (out, _) = stepflux("check", "over-rating", s);
    let text = String::from_utf8_lossy(&out.stdout);
    assert_eq!(out.status.code(), Some(1), "{}", stderr(&out));
    assert!(
        text.contains("converter.switch.voltage_rating: steady drain voltage 48.0 V")
            && text.contains("exceeds the 40 V rating"),
        "{text}"
    );
}

#[test]
fn the_controller_drives_an_active_clamp_in_single_ended_mode() {
    // scenarios/README.md: the single_ended mode gates the auxiliary switch
    // complementary to the main one. The check accepts it (it used to be documented as
    // refused) and a short run simulates it without error.
    let mut s: Value = serde_json::from_str(include_str!("../scenarios/active-clamp.json"))
        .expect("active_clamp parses");
    let startup: Value = serde_json::from_str(STARTUP).expect("demo-startup parses");
    s["drive"] = startup["drive"].clone();
    s["drive"]["controller"]["aux_dead_time"] = json!("100 ns");
    s["analysis"]["stop_time"] = json!("0.5 ms");
    let (out, _) = stepflux("check", "clamp-ctl", s.clone());
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let (out, run) = stepflux("run", "clamp-ctl", s);
    let code = out.status.code();
    assert!(
        code == Some(0) || code == Some(1),
        "{code:?}: {}",
        stderr(&out)
    );
    assert!(summary(&run)["error"].is_null());
}

#[test]
fn check_names_the_sample_interval_the_time_grid_keeps() {
    // The run's grid for a 150 kHz clock: a tick of (T/4)/2^L with L the least making
    // it at most 1 ps (`SimOptions::for_period`, `TimeGrid::new`). 1/(6 MHz) is
    // 209715.2 ticks, so the run keeps 209715 of them.
    let quarter: f64 = 1.0 / 150e3 / 4.0;
    let tick = quarter / 2f64.powi((quarter / 1e-12).log2().ceil() as i32);
    let kept = (1.0 / 6e6 / tick).round() * tick;
    let mut s: Value = serde_json::from_str(STARTUP).expect("demo-startup parses");
    s["analysis"]["sample_interval"] = json!(1.0 / 6e6);
    let (out, _) = stepflux("check", "grid", s);
    let text = String::from_utf8_lossy(&out.stdout);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    // The rounding is said as how much shorter the kept interval is (three figures;
    // below the pico range the notation falls back to an exponent).
    let shorter = 1.0 / 6e6 - kept;
    assert!(
        text.contains(&format!("{shorter:.2e} s shorter on the time grid")),
        "{kept:e}: {text}"
    );
}
