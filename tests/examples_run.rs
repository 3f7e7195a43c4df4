//! Every example scenario in `scenarios/` runs end to end. The examples are documented
//! in `scenarios/README.md`: all of them meet their own limits except the deliberately
//! failing reset design, whose core-reset check must fail (exit 1, a limit failed).

use std::path::PathBuf;
use std::process::Command;

#[test]
fn every_example_runs_and_only_the_failing_design_fails() {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("scenarios");
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .expect("scenarios/")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "json"))
        .filter(|p| {
            !p.file_name()
                .is_some_and(|n| n.to_string_lossy().contains("schema"))
        })
        .filter(|p| std::fs::read_to_string(p).is_ok_and(|t| t.contains("\"converter\"")))
        .collect();
    files.sort();
    assert!(files.len() >= 5, "at least five examples: {files:?}");
    let out = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("examples_run");
    let _ = std::fs::remove_dir_all(&out);
    let output = Command::new(env!("CARGO_BIN_EXE_stepflux"))
        .args(["run", "--json", "--out"])
        .arg(&out)
        .args(&files)
        .output()
        .expect("binary runs");
    let doc: serde_json::Value = serde_json::from_slice(&output.stdout).expect("JSON report");
    let runs = doc.as_array().expect("one entry per scenario");
    assert_eq!(runs.len(), files.len());
    for run in runs {
        let file = run["scenario_file"].as_str().unwrap_or_default();
        let code = run["exit_code"].as_u64();
        let expected = if file.contains("reset-failure") { 1 } else { 0 };
        assert_eq!(code, Some(expected), "{file}: {}", run);
        assert!(
            run["summary"]["measurements"]
                .as_array()
                .is_some_and(|m| m.len() > 10),
            "{file} measured"
        );
    }
    assert_eq!(
        output.status.code(),
        Some(1),
        "the failing design sets the exit code"
    );
}
