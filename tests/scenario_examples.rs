//! The shipped examples: every scenario in `scenarios/` must pass `check` (running them
//! is the run pipeline's test), be described in `scenarios/README.md`, and the
//! committed schema must be what `stepflux schema` prints.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn stepflux(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_stepflux"))
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .expect("binary runs")
}

fn examples() -> Vec<PathBuf> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios");
    let mut list: Vec<PathBuf> = std::fs::read_dir(&dir)
        .expect("scenarios/ exists")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "json"))
        .filter(|p| !p.to_string_lossy().ends_with(".schema.json"))
        // Batch studies live beside the scenarios; a study has a base, not a converter.
        .filter(|p| std::fs::read_to_string(p).is_ok_and(|t| t.contains("\"converter\"")))
        .collect();
    list.sort();
    list
}

#[test]
fn every_example_passes_check_and_is_documented() {
    let list = examples();
    // Start-up, load step, low-line maximum duty, a failing reset, and one per reset
    // scheme besides the reset winding (scenarios/README.md).
    assert!(list.len() >= 7, "{list:?}");
    let readme =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/README.md"))
            .expect("scenarios/README.md");
    for path in &list {
        let file = path.file_name().unwrap().to_string_lossy().into_owned();
        let out = stepflux(&["check", &format!("scenarios/{file}")]);
        let stdout = String::from_utf8_lossy(&out.stdout);
        assert_eq!(
            out.status.code(),
            Some(0),
            "{file}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
        assert!(stdout.contains(": valid ("), "{file}: {stdout}");
        assert!(
            readme.contains(&format!("`{file}`")),
            "{file} is not described in scenarios/README.md"
        );
    }
}

#[test]
fn every_reset_scheme_has_an_example() {
    let mut templates = Vec::new();
    for path in examples() {
        let out = stepflux(&["check", "--json", &path.to_string_lossy()]);
        let v: serde_json::Value =
            serde_json::from_slice(&out.stdout).expect("check --json prints JSON");
        assert_eq!(v["valid"], true);
        templates.push(v["template"].as_str().unwrap_or_default().to_string());
    }
    for t in ["reset_winding", "rcd_clamp", "two_switch", "active_clamp"] {
        assert!(
            templates.iter().any(|x| x == t),
            "no example of {t}: {templates:?}"
        );
    }
}

#[test]
fn check_json_reports_the_demo_figures() {
    let out = stepflux(&["check", "--json", "scenarios/demo-startup.json"]);
    assert_eq!(out.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON");
    // The figures are listed as in summary.json's "design": name, value, unit.
    let f = v["figures"].as_array().expect("a list of figures");
    let get = |k: &str| {
        f.iter()
            .find(|x| x["name"] == k)
            .and_then(|x| x["value"].as_f64())
            .unwrap_or(f64::NAN)
    };
    // Erickson & Maksimović §6.3.2 and §2.2: D = (Vo + Vf)/(Vin·Ns/Np) = 5.4/18;
    // reset limit 1/(1 + Nr/Np) = 0.5; drain Vin·(1 + Np/Nr) = 48 V. Tolerance 1e-12
    // relative (rounding only).
    for (key, want) in [
        ("design.duty.nominal", 0.3),
        ("design.duty.reset_limit", 0.5),
        ("design.drain_stress", 48.0),
    ] {
        assert!(
            (get(key) - want).abs() <= 1e-12 * want,
            "{key} = {}",
            get(key)
        );
    }
    assert_eq!(v["warnings"].as_array().map(Vec::len), Some(0));
}

#[test]
fn committed_schema_is_the_generated_one() {
    let out = stepflux(&["schema"]);
    assert_eq!(out.status.code(), Some(0));
    let printed: serde_json::Value = serde_json::from_slice(&out.stdout).expect("schema is JSON");
    let committed: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(
            Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/stepflux.schema.json"),
        )
        .expect("scenarios/stepflux.schema.json"),
    )
    .expect("committed schema is JSON");
    assert!(
        printed == committed,
        "scenarios/stepflux.schema.json is stale: regenerate with `stepflux schema > scenarios/stepflux.schema.json`"
    );
}

/// Every `scenarios/….json` named in the command-line help or the READMEs exists, so a
/// copied example command runs (issue 11: the `run` help named a missing file).
#[test]
fn every_scenario_path_named_in_help_and_docs_exists() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    for doc in [
        "src/cli.rs",
        "README.md",
        "DEVELOPERS.md",
        "scenarios/README.md",
    ] {
        let text = std::fs::read_to_string(root.join(doc)).expect(doc);
        for (at, _) in text.match_indices("scenarios/") {
            let tail = &text[at..];
            let end = tail
                .find(|c: char| !(c.is_ascii_alphanumeric() || "/_.-".contains(c)))
                .unwrap_or(tail.len());
            let path = tail[..end].trim_end_matches('.');
            if path.ends_with(".json") {
                assert!(
                    root.join(path).exists(),
                    "{doc} names {path}, which does not exist"
                );
            }
        }
    }
}
