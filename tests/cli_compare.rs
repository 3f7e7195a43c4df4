//! `stepflux compare` through the binary: two runs figure by figure, differences
//! marked in the terminal and highlighted in a self-contained HTML page; a run against
//! itself shows no difference (a comparison that always reported changes could not
//! tell two designs apart).

use std::path::PathBuf;

mod common;
use common::{example, stepflux};

#[test]
fn two_runs_compare_figure_by_figure() {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("compare_runs");
    let _ = std::fs::remove_dir_all(&dir);
    let run = stepflux()
        .args(["run", "--quiet", "--out"])
        .arg(&dir)
        .arg(example("demo-startup.json"))
        .arg(example("two-switch.json"))
        .output()
        .expect("binary runs");
    assert!(run.status.code().is_some_and(|c| c <= 1), "runs");
    let html = dir.join("compare.html");
    let out = stepflux()
        .arg("compare")
        .arg(dir.join("demo-startup"))
        .arg(dir.join("two-switch/summary.json"))
        .arg("--html")
        .arg(&html)
        .output()
        .expect("binary runs");
    let text = String::from_utf8_lossy(&out.stdout);
    assert_eq!(out.status.code(), Some(0), "{text}");
    // Same power stage, different reset: the drain peak differs (2·Vin against Vin,
    // E&M §6.3.2), the turns ratio does not.
    let line = |key: &str| {
        text.lines()
            .find(|l| l[1..].trim_start().starts_with(key))
            .unwrap_or_else(|| panic!("{key} listed: {text}"))
            .to_string()
    };
    assert!(
        line("reset_check.worst.drain_peak ").starts_with('*'),
        "{text}"
    );
    assert!(
        line("design.turns_ratio.secondary ").starts_with(' '),
        "{text}"
    );
    assert!(line("out.v.mean ").contains(" V"), "engineering units");
    let page = std::fs::read_to_string(&html).expect("html written");
    assert!(page.contains("class=\"changed\""));
    assert!(
        !page.contains("src=") && !page.contains("href="),
        "self-contained"
    );

    let same = stepflux()
        .arg("compare")
        .arg(dir.join("two-switch"))
        .arg(dir.join("two-switch"))
        .output()
        .expect("binary runs");
    let same = String::from_utf8_lossy(&same.stdout);
    assert!(same.contains(": 0 of "), "{same}");
}

#[test]
fn a_run_and_a_study_do_not_compare() {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("compare_kinds");
    std::fs::create_dir_all(&dir).expect("scratch");
    std::fs::write(
        dir.join("a.json"),
        r#"{"measurements": [], "passed": true}"#,
    )
    .expect("w");
    std::fs::write(dir.join("b.json"), r#"{"cases": [], "counts": {}}"#).expect("w");
    let out = stepflux()
        .arg("compare")
        .arg(dir.join("a.json"))
        .arg(dir.join("b.json"))
        .output()
        .expect("binary runs");
    assert_eq!(out.status.code(), Some(2));
}
