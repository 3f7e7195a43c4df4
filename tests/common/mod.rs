//! Shared by the tests that drive the binary: the binary itself, scratch folders, the
//! example scenarios, and (for the `batch_*` tests) small studies of the demo scenario
//! cut to 1 ms, so a dozen cases take well under a second of CPU each run.

#![allow(dead_code)] // Each test file uses its own subset of these helpers.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use serde_json::{json, Value};

/// The binary under test.
pub fn stepflux() -> Command {
    Command::new(env!("CARGO_BIN_EXE_stepflux"))
}

/// An empty scratch folder (stale output must not satisfy an assertion).
pub fn scratch(name: &str) -> PathBuf {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join(name);
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// An example scenario shipped in `scenarios/`.
pub fn example(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("scenarios")
        .join(name)
}

/// The example scenario the studies start from.
pub fn base_scenario() -> String {
    concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/demo-startup.json").to_string()
}

/// Twelve cases: line × load corners, 1 ms each, three Monte Carlo units of the
/// output capacitor.
pub fn quick_study(name: &str) -> Value {
    json!({
        "name": name,
        "base": base_scenario(),
        "parameters": {
            "vin": "converter.input.voltage",
            "rload": "converter.load.resistance",
            "stop": "analysis.stop_time",
            "cout": "converter.output_capacitor.capacitance"
        },
        "corners": { "vin": ["20 V", "28 V"], "rload": ["1R25", "2R5"], "stop": ["1 ms"] },
        "monte_carlo": {
            "samples": 3,
            "seed": 11,
            "tolerances": { "cout": { "uniform_percent": 20 } }
        },
        "limits": { "startup_t90": null }
    })
}

/// Writes `study` to `dir/study.json`.
pub fn write_study(dir: &Path, study: &Value) -> PathBuf {
    let path = dir.join("study.json");
    std::fs::write(&path, serde_json::to_string_pretty(study).unwrap()).unwrap();
    path
}

/// Runs `stepflux batch STUDY --out OUT --waveforms none` plus `extra`.
pub fn batch(study: &Path, out: &Path, extra: &[&str]) -> Output {
    stepflux()
        .arg("batch")
        .arg(study)
        .arg("--out")
        .arg(out)
        .args(["--waveforms", "none"])
        .args(extra)
        .output()
        .expect("binary runs")
}

/// Exit code, with stderr in the panic message when it is not one of `allowed`.
pub fn code(output: &Output, allowed: &[i32]) -> i32 {
    let c = output.status.code().unwrap_or(-1);
    assert!(
        allowed.contains(&c),
        "exit {c}, stderr:\n{}",
        String::from_utf8_lossy(&output.stderr)
    );
    c
}

/// The three study tables, as text.
pub fn tables(study_dir: &Path) -> [String; 3] {
    ["results.csv", "results.json", "worst.json"].map(|f| {
        std::fs::read_to_string(study_dir.join(f))
            .unwrap_or_else(|e| panic!("{}: {e}", study_dir.join(f).display()))
    })
}

/// Parsed results.json.
pub fn results(study_dir: &Path) -> Value {
    serde_json::from_str(&tables(study_dir)[1]).unwrap()
}
