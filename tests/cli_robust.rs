//! Running unattended (issue 12) through the binary: work that cannot finish is refused
//! before it starts, a stop request keeps what was computed, a full disk is reported
//! with the path and leaves no temporary files. Exit codes are README "Exit codes"
//! (2 bad input, 3 simulation or write failed, 4 interrupted).

use std::path::{Path, PathBuf};
use std::process::{Child, Command, Output, Stdio};
use std::time::{Duration, Instant};

use serde_json::{json, Value};

mod common;
use common::{scratch, stepflux};

const DEMO: &str = include_str!("../scenarios/demo-startup.json");

/// The demo scenario with `edit` applied, written to `dir/<file>`.
fn scenario(dir: &Path, file: &str, edit: impl FnOnce(&mut Value)) -> PathBuf {
    let mut v: Value = serde_json::from_str(DEMO).expect("demo parses");
    edit(&mut v);
    let path = dir.join(file);
    std::fs::write(&path, serde_json::to_string_pretty(&v).expect("json")).expect("write");
    path
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// Every file below `dir` whose name marks it temporary (`.<name>.<pid>.tmp`).
fn temporaries(dir: &Path) -> Vec<PathBuf> {
    let mut found = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for entry in std::fs::read_dir(&d).into_iter().flatten().flatten() {
            let p = entry.path();
            if p.is_dir() {
                stack.push(p);
            } else if p.to_string_lossy().ends_with(".tmp") {
                found.push(p);
            }
        }
    }
    found
}

#[test]
fn a_glacial_clock_is_refused_before_anything_runs() {
    // 1e-30 Hz is a period of 1e30 s: without a bound, `run` would never end.
    let dir = scratch("robust_glacial");
    let path = scenario(&dir, "glacial.json", |v| {
        v["drive"]["controller"]["oscillator"]["frequency"] = json!("1e-30 Hz");
    });
    let out = stepflux()
        .args(["run", "--quiet", "--out"])
        .arg(dir.join("out"))
        .arg(&path)
        .output()
        .expect("binary runs");
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
    let e = stderr(&out);
    assert!(
        e.contains("drive.controller.oscillator.frequency: 1e-30 is outside the frequency"),
        "{e}"
    );
    // The file is named once per message (it used to be printed twice by `run`).
    assert_eq!(e.matches("glacial.json").count(), 1, "{e}");
    assert!(
        !dir.join("out/demo-startup").exists(),
        "nothing was written"
    );
}

#[test]
fn two_scenarios_of_one_name_are_refused_before_anything_runs() {
    let dir = scratch("robust_duplicate");
    let a = scenario(&dir, "a.json", |_| {});
    let b = scenario(&dir, "b.json", |_| {});
    let out = stepflux()
        .args(["run", "--quiet", "--out"])
        .arg(dir.join("out"))
        .args([&a, &b])
        .output()
        .expect("binary runs");
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
    let e = stderr(&out);
    assert!(e.contains("a.json and "), "{e}");
    assert!(
        e.contains(
            "b.json both have the name \"demo-startup\", and would write the same output folder"
        ),
        "{e}"
    );
    assert!(
        !dir.join("out/demo-startup").exists(),
        "nothing was written"
    );
}

/// A run of the demo long enough (20 s simulated, about 3·10⁶ periods) to be still
/// going when the signal comes.
fn long_run(dir: &Path) -> Child {
    let path = scenario(dir, "long.json", |v| {
        v["name"] = json!("long");
        v["analysis"]["stop_time"] = json!("20 s");
        v["analysis"]["sample_interval"] = json!("10 us");
        v["signals"] = json!(["out.v"]);
    });
    stepflux()
        .args(["run", "--quiet", "--out"])
        .arg(dir.join("out"))
        .arg(path)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("binary starts")
}

/// Waits for `child`, killing it and failing if it does not end within `limit` — a
/// guard against a hang, not a timing requirement.
fn wait_or_fail(mut child: Child, limit: Duration) -> Output {
    let start = Instant::now();
    while child.try_wait().expect("wait").is_none() {
        if start.elapsed() > limit {
            let _ = child.kill();
            panic!("the run did not stop within {limit:?} of the signal");
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    child.wait_with_output().expect("output")
}

fn interrupted_run_keeps_its_results(signal: &str, name: &str) {
    let dir = scratch(name);
    let child = long_run(&dir);
    // The run has started once its waveform file exists; then let it work for ~1 s.
    let file = dir.join("out/long/waveforms.h5");
    let start = Instant::now();
    while !file.exists() && start.elapsed() < Duration::from_secs(120) {
        std::thread::sleep(Duration::from_millis(20));
    }
    std::thread::sleep(Duration::from_secs(1));
    let sent = Command::new("kill")
        .args([signal, &child.id().to_string()])
        .status()
        .expect("kill runs");
    assert!(sent.success());
    let out = wait_or_fail(child, Duration::from_secs(120));
    assert_eq!(out.status.code(), Some(4), "{}", stderr(&out));
    assert!(
        stderr(&out).contains("interrupted by SIGINT or SIGTERM"),
        "{}",
        stderr(&out)
    );

    let run = dir.join("out/long");
    let summary: Value =
        serde_json::from_slice(&std::fs::read(run.join("summary.json")).expect("summary"))
            .expect("summary is JSON");
    let at = summary["interrupted"]["at_s"]
        .as_f64()
        .expect("interrupted.at_s");
    assert!(at > 0.0 && at < 20.0, "stopped part-way: {at}");
    assert_eq!(summary["simulated_time_s"].as_f64(), Some(at));
    assert_eq!(summary["passed"], json!(false));
    // Every null figure says why.
    for f in summary["measurements"].as_array().expect("measurements") {
        if f["value"].is_null() {
            assert!(f["reason"].is_string(), "null without a reason: {f}");
        }
    }
    // An outside reader opens the file; its samples end at or before the stop.
    let script = "import sys, h5py\n\
        f = h5py.File(sys.argv[1], 'r')\n\
        t = f['time'][:]; v = f['out.v'][:]\n\
        assert len(t) == len(v) > 0, (len(t), len(v))\n\
        assert t[-1] <= float(sys.argv[2]) * (1 + 1e-9), (t[-1], sys.argv[2])\n\
        print(len(t))\n";
    let read = Command::new("python3")
        .args(["-c", script])
        .arg(run.join("waveforms.h5"))
        .arg(at.to_string())
        .output()
        .expect("python3 runs");
    assert!(
        read.status.success(),
        "h5py could not read the interrupted file: {}",
        String::from_utf8_lossy(&read.stderr)
    );
    assert!(temporaries(&dir).is_empty(), "{:?}", temporaries(&dir));
}

#[test]
fn sigint_stops_a_run_with_a_readable_file_and_an_interrupted_summary() {
    interrupted_run_keeps_its_results("-INT", "robust_sigint");
}

#[test]
fn sigterm_stops_a_run_the_same_way() {
    interrupted_run_keeps_its_results("-TERM", "robust_sigterm");
}

/// `stepflux run` of the 2 ms demo under a file-size limit of `blocks` × 512 bytes
/// (`ulimit -f` of the POSIX shell); the limit stands in for a full disk (both end a
/// write with an error the run must report).
fn run_with_file_limit(dir: &Path, blocks: u32) -> Output {
    let path = scenario(dir, "full.json", |v| {
        v["analysis"]["stop_time"] = json!("2 ms");
    });
    let bin = env!("CARGO_BIN_EXE_stepflux");
    let script = format!(
        "ulimit -f {blocks} && exec '{bin}' run --quiet --out '{}' '{}'",
        dir.join("out").display(),
        path.display()
    );
    Command::new("sh")
        .args(["-c", &script])
        .output()
        .expect("sh runs")
}

#[test]
fn a_waveform_file_past_the_limit_is_reported_with_its_path() {
    // 100 kB: the summary fits, the waveform file (about 1 MB for 2 ms) does not.
    let dir = scratch("robust_full_waveforms");
    let out = run_with_file_limit(&dir, 200);
    let e = stderr(&out);
    assert_eq!(out.status.code(), Some(3), "{e}");
    assert!(e.contains("out/demo-startup/waveforms.h5"), "{e}");
    assert!(
        e.contains("no room to write: the disk is full or a file-size limit"),
        "{e}"
    );
    let summary: Value = serde_json::from_slice(
        &std::fs::read(dir.join("out/demo-startup/summary.json")).expect("summary written"),
    )
    .expect("summary is whole JSON");
    let error = summary["error"].as_str().expect("summary names the error");
    assert!(error.contains("waveforms.h5"), "{error}");
    // A waveform file cut short by a failed write is truncated below the end the HDF5
    // library recorded, so no reader opens it: it is removed, and the message says so
    // (src/writers/waveforms.rs, `WaveformSink::finish`), naming the path once.
    assert!(
        !dir.join("out/demo-startup/waveforms.h5").exists(),
        "an unreadable waveform file was left behind"
    );
    assert!(e.contains("the incomplete file was removed"), "{e}");
    assert_eq!(e.matches("waveforms.h5").count(), 1, "{e}");
    assert!(temporaries(&dir).is_empty(), "{:?}", temporaries(&dir));
}

#[test]
fn check_prints_a_run_time_measured_on_a_trial_of_the_scenario() {
    // The time is machine-dependent, so only its form is checked: a positive, finite
    // figure in engineering units from a trial of the scenario itself; JSON output
    // carries no wall time, so it is the same on every machine.
    let dir = scratch("robust_calibration");
    let path = scenario(&dir, "calibrate.json", |_| {});
    let out = stepflux()
        .arg("check")
        .arg(&path)
        .output()
        .expect("binary runs");
    let text = String::from_utf8_lossy(&out.stdout);
    let line = text
        .lines()
        .find(|l| l.starts_with("run time estimate: about "))
        .unwrap_or_else(|| panic!("no calibrated estimate in:\n{text}{}", stderr(&out)));
    assert!(
        line.contains("on this machine now (trials of up to "),
        "{line}"
    );
    let per_period = line
        .split("periods: ")
        .nth(1)
        .and_then(|rest| rest.split(" per period").next())
        .unwrap_or_else(|| panic!("no per-period time in: {line}"));
    let (number, unit) = per_period.split_once(' ').expect("value and unit");
    let value: f64 = number.parse().expect("a number");
    assert!(value.is_finite() && value > 0.0, "{line}");
    assert!(["ps", "ns", "µs", "ms", "s"].contains(&unit), "{line}");
    let runs: Vec<Value> = (0..2)
        .map(|_| {
            let o = stepflux()
                .args(["check", "--json"])
                .arg(&path)
                .output()
                .expect("runs");
            serde_json::from_slice(&o.stdout).expect("check --json is JSON")
        })
        .collect();
    assert_eq!(runs[0], runs[1], "check --json differs between two runs");
    assert!(runs[0]["cost_estimate"].get("seconds").is_none());
}

#[test]
fn a_summary_past_the_limit_leaves_no_partial_or_temporary_file() {
    // 2 kB: the summary (about 10 kB) cannot be written either.
    let dir = scratch("robust_full_summary");
    let out = run_with_file_limit(&dir, 4);
    let e = stderr(&out);
    assert_eq!(out.status.code(), Some(3), "{e}");
    assert!(e.contains("no room to write"), "{e}");
    let summary = dir.join("out/demo-startup/summary.json");
    assert!(
        !summary.exists(),
        "a summary that could not be written whole must not exist"
    );
    assert!(temporaries(&dir).is_empty(), "{:?}", temporaries(&dir));
}
