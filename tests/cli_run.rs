//! `stepflux run` and `stepflux plot` through the binary: several scenarios in one
//! call, one of them bad; outputs per scenario; exit code by the most severe outcome
//! (README "Exit codes").

mod common;
use common::{example, scratch, stepflux};

#[test]
fn a_bad_scenario_does_not_stop_the_good_one() {
    let dir = scratch("run_mixed");
    let bad = dir.join("bad.json");
    std::fs::write(&bad, "{ \"name\": \"bad\", ").expect("write");
    let output = stepflux()
        .args(["run", "--quiet", "--out"])
        .arg(dir.join("out"))
        .arg(&bad)
        .arg(example("two-switch.json"))
        .output()
        .expect("binary runs");
    // Bad input (2) outranks a passing run; the good scenario still wrote its outputs.
    assert_eq!(
        output.status.code(),
        Some(2),
        "stderr: {}",
        String::from_utf8_lossy(&output.stderr)
    );
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(stderr.contains("bad.json"), "{stderr}");
    let run = dir.join("out/two-switch");
    for f in ["waveforms.h5", "summary.json", "plots/output.svg"] {
        assert!(run.join(f).is_file(), "{f} written");
    }
}

#[test]
fn a_failing_reset_design_exits_with_a_failed_limit() {
    let dir = scratch("run_fail");
    let output = stepflux()
        .args(["run", "--json", "--out"])
        .arg(&dir)
        .arg(example("rcd-clamp-reset-failure.json"))
        .output()
        .expect("binary runs");
    // The example is built so that the core does not reset (see scenarios/README.md):
    // exit 1, a spec limit failed, with the failing cycle named in the summary.
    assert_eq!(output.status.code(), Some(1));
    let doc: serde_json::Value = serde_json::from_slice(&output.stdout).expect("JSON on stdout");
    let summary = &doc[0]["summary"];
    assert_eq!(summary["passed"], serde_json::Value::Bool(false));
    let names: Vec<&str> = summary["measurements"]
        .as_array()
        .expect("measurements")
        .iter()
        .filter_map(|m| m["name"].as_str())
        .collect();
    assert!(
        names.contains(&"reset_check.first_failure.cycle"),
        "{names:?}"
    );
}

#[test]
fn plot_writes_an_svg_of_named_signals() {
    let dir = scratch("plot");
    let status = stepflux()
        .args(["run", "--quiet", "--out"])
        .arg(&dir)
        .arg(example("two-switch.json"))
        .status()
        .expect("binary runs");
    assert_eq!(status.code(), Some(0));
    let svg = dir.join("drain.svg");
    let status = stepflux()
        .args(["plot"])
        .arg(dir.join("two-switch/waveforms.h5"))
        .args(["--signal", "drain.v", "--signal", "mag.i", "--out"])
        .arg(&svg)
        .status()
        .expect("binary runs");
    assert_eq!(status.code(), Some(0));
    let text = std::fs::read_to_string(&svg).expect("svg written");
    assert!(text.starts_with("<svg") && text.contains("drain.v"));
    let status = stepflux()
        .args(["plot"])
        .arg(dir.join("two-switch/waveforms.h5"))
        .args(["--signal", "no.such", "--out"])
        .arg(dir.join("x.svg"))
        .stderr(std::process::Stdio::null())
        .status()
        .expect("binary runs");
    assert_eq!(status.code(), Some(2), "unknown signal is bad input");
    // A time window (README "Using it"): axes in engineering units with a readable
    // label, not the dataset path; a window past the end of the run is bad input.
    let zoom = dir.join("zoom.svg");
    let status = stepflux()
        .args(["plot"])
        .arg(dir.join("two-switch/waveforms.h5"))
        .args([
            "--signal", "mag.i", "--from", "20 us", "--to", "40 us", "--out",
        ])
        .arg(&zoom)
        .status()
        .expect("binary runs");
    assert_eq!(status.code(), Some(0));
    let text = std::fs::read_to_string(&zoom).expect("svg written");
    assert!(text.contains("time (µs)") && text.contains("magnetising current"));
    let status = stepflux()
        .args(["plot"])
        .arg(dir.join("two-switch/waveforms.h5"))
        .args(["--signal", "mag.i", "--from", "1000 s", "--out"])
        .arg(dir.join("late.svg"))
        .stderr(std::process::Stdio::null())
        .status()
        .expect("binary runs");
    assert_eq!(status.code(), Some(2), "an empty window is bad input");
}
