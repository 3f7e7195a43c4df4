//! An answer depends only on the circuit: the output sample interval, the signals
//! saved and whether waveforms are written at all change no figure.
//!
//! Specification (the project's principle, DEVELOPERS.md "The engine's method"): steps
//! end where the circuit, its drive and the stop time say, never at an output sample,
//! and every figure is computed from the trace of the exact solution. So every example
//! scenario, run at sample intervals of 10 ns, 1 µs and 10 µs, with every signal saved
//! or just one, and through a batch that writes no waveforms, reports the same
//! figures. The tolerance is 1e-9 relative (plus 1e-15 absolute for figures that are
//! zero): the mechanism makes them equal bit for bit, the tolerance only leaves room
//! for a future summation order that differs in the last digits.

use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;

const REL: f64 = 1e-9;
const ABS: f64 = 1e-15;

fn examples() -> Vec<PathBuf> {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("scenarios");
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .expect("scenarios/")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "json"))
        .filter(|p| !p.to_string_lossy().ends_with("schema.json"))
        .filter(|p| std::fs::read_to_string(p).is_ok_and(|t| t.contains("\"converter\"")))
        .collect();
    files.sort();
    files
}

/// One variant of an example: its file, written into `dir`, and its name.
fn variant(example: &Path, dir: &Path, tag: &str, interval: &str, all: bool) -> PathBuf {
    let mut s: Value =
        serde_json::from_str(&std::fs::read_to_string(example).expect("example reads"))
            .expect("example parses");
    let name = format!("{}-{tag}", s["name"].as_str().expect("name"));
    s["name"] = Value::from(name.clone());
    s.as_object_mut().expect("object").remove("$schema");
    s["analysis"]["sample_interval"] = Value::from(interval);
    s["signals"] = if all {
        Value::Array(Vec::new())
    } else {
        Value::from(vec!["out.v"])
    };
    let path = dir.join(format!("{name}.json"));
    std::fs::write(&path, serde_json::to_string(&s).expect("serialises")).expect("writes");
    path
}

/// Every number of a summary's measurements and verdicts, by name.
fn figures(summary: &Value) -> Vec<(String, Option<f64>)> {
    let mut out = Vec::new();
    for m in summary["measurements"].as_array().expect("measurements") {
        out.push((
            m["name"].as_str().unwrap_or_default().to_string(),
            m["value"].as_f64(),
        ));
    }
    for v in summary["verdicts"].as_array().expect("verdicts") {
        let limit = v["limit"].as_str().unwrap_or_default();
        out.push((format!("verdict {limit}"), v["value"].as_f64()));
        out.push((
            format!("verdict {limit} pass"),
            v["pass"].as_bool().map(f64::from),
        ));
    }
    out
}

/// Largest relative difference between two figure lists, failing on any mismatch.
fn compare(what: &str, a: &[(String, Option<f64>)], b: &[(String, Option<f64>)]) -> f64 {
    let names = |f: &[(String, Option<f64>)]| f.iter().map(|x| x.0.clone()).collect::<Vec<_>>();
    assert_eq!(names(a), names(b), "{what}: the same figures");
    let mut worst: f64 = 0.0;
    for ((name, x), (_, y)) in a.iter().zip(b) {
        match (x, y) {
            (Some(x), Some(y)) => {
                let d = (x - y).abs();
                assert!(
                    d <= REL * x.abs().max(y.abs()) + ABS,
                    "{what}: {name} {x} vs {y}"
                );
                if d > 0.0 {
                    worst = worst.max(d / x.abs().max(y.abs()));
                }
            }
            (None, None) => {}
            _ => panic!("{what}: {name} {x:?} vs {y:?}"),
        }
    }
    worst
}

fn run_all(files: &[PathBuf], out: &Path) -> Vec<Value> {
    let output = Command::new(env!("CARGO_BIN_EXE_stepflux"))
        .args(["run", "--json", "--quiet", "--out"])
        .arg(out)
        .args(files)
        .output()
        .expect("binary runs");
    let doc: Value = serde_json::from_slice(&output.stdout).expect("JSON report");
    doc.as_array().expect("one entry per scenario").clone()
}

#[test]
fn figures_do_not_depend_on_sample_interval_or_saved_signals() {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("invariance");
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("temp dir");
    // 10 ns with every signal saved writes ~100 MB per example; the closed-loop active
    // clamp, the case where the output settings used to matter most, gets it.
    let settings = [
        ("a", "10 ns", false),
        ("b", "1 us", true),
        ("c", "1 us", false),
        ("d", "10 us", true),
        ("e", "10 us", false),
    ];
    let mut groups = Vec::new();
    let mut files = Vec::new();
    for example in examples() {
        let mut names = Vec::new();
        for (tag, interval, all) in settings {
            files.push(variant(&example, &dir, tag, interval, all));
            names.push(tag.to_string());
        }
        if example
            .to_string_lossy()
            .contains("active-clamp-closed-loop")
        {
            files.push(variant(&example, &dir, "f", "10 ns", true));
            names.push("f".into());
        }
        groups.push((example, names));
    }
    let runs = run_all(&files, &dir.join("out"));
    assert_eq!(runs.len(), files.len());
    let summary_of = |file: &Path| -> Value {
        runs.iter()
            .find(|r| r["scenario_file"].as_str() == Some(&file.to_string_lossy()))
            .map(|r| r["summary"].clone())
            .unwrap_or_else(|| panic!("{} ran", file.display()))
    };
    let mut worst: f64 = 0.0;
    let mut k = 0;
    for (example, tags) in &groups {
        let first = figures(&summary_of(&files[k]));
        assert!(first.len() > 10, "{} measured", example.display());
        for (j, tag) in tags.iter().enumerate().skip(1) {
            let what = format!("{} variant {tag}", example.display());
            worst = worst.max(compare(&what, &first, &figures(&summary_of(&files[k + j]))));
        }
        k += tags.len();
    }
    eprintln!("worst relative difference over every example and setting: {worst:e}");
}

#[test]
fn a_batch_that_writes_no_waveforms_reports_the_run_figures() {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("invariance_batch");
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("temp dir");
    let example = examples()
        .into_iter()
        .find(|p| p.to_string_lossy().contains("active-clamp-closed-loop"))
        .expect("the closed-loop active-clamp example");
    let base = variant(&example, &dir, "base", "1 us", true);
    let base_name = base
        .file_name()
        .expect("file")
        .to_string_lossy()
        .to_string();
    let study = dir.join("study.json");
    let text = format!(
        r#"{{ "name": "inv", "base": "{base_name}",
             "parameters": {{ "rload": "converter.load.resistance" }},
             "corners": {{ "rload": ["1R25"] }} }}"#
    );
    std::fs::write(&study, text).expect("study writes");
    let reference = run_all(std::slice::from_ref(&base), &dir.join("run"));
    let from_run = figures(&reference[0]["summary"]);
    for mode in ["none", "all"] {
        let out = dir.join(format!("batch-{mode}"));
        let status = Command::new(env!("CARGO_BIN_EXE_stepflux"))
            .args(["batch", "--jobs", "1", "--waveforms", mode, "--out"])
            .arg(&out)
            .arg(&study)
            .output()
            .expect("batch runs");
        assert!(status.status.code().is_some_and(|c| c <= 1), "{status:?}");
        let results: Value = serde_json::from_str(
            &std::fs::read_to_string(find(&out, "results.json")).expect("results.json"),
        )
        .expect("results parse");
        let case = &results["cases"][0];
        let mut measured: Vec<(String, Option<f64>)> = case["measurements"]
            .as_object()
            .expect("case measurements by name")
            .iter()
            .map(|(name, v)| (name.clone(), v.as_f64()))
            .collect();
        measured.sort_by(|a, b| a.0.cmp(&b.0));
        let mut run_measured: Vec<_> = from_run
            .iter()
            .filter(|(n, _)| !n.starts_with("verdict "))
            .cloned()
            .collect();
        run_measured.sort_by(|a, b| a.0.cmp(&b.0));
        // The batch tables leave out figures that have no value (a reset margin where
        // no cycle reset); the run's summary lists them as null.
        run_measured.retain(|(name, value)| {
            let kept = measured.iter().any(|(n, _)| n == name);
            assert!(kept || value.is_none(), "batch keeps {name}");
            kept
        });
        compare(
            &format!("batch --waveforms {mode}"),
            &run_measured,
            &measured,
        );
    }
}

/// The first file called `name` under `dir`.
fn find(dir: &Path, name: &str) -> PathBuf {
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).into_iter().flatten().flatten() {
            let p = e.path();
            if p.is_dir() {
                stack.push(p);
            } else if p.file_name().is_some_and(|n| n == name) {
                return p;
            }
        }
    }
    panic!("no {name} under {}", dir.display())
}
