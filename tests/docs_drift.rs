//! The documents name what the code does: the README's exit-code table lists exactly
//! the codes `src/exit.rs` defines, each command's `--help` its codes from the same
//! table, DEVELOPERS.md's file index every source file, and its probe list exactly the
//! set of signals the example scenarios' converters carry (`check --json` "signals").
//! Either fails when one side changes without the other.

use std::collections::BTreeSet;
use std::path::Path;
use std::process::Command;

use stepflux::exit::Exit;

fn read(name: &str) -> String {
    std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join(name)).expect(name)
}

#[test]
fn readme_exit_codes_are_the_defined_ones() {
    let readme = read("README.md");
    let table = readme
        .split("## Exit codes")
        .nth(1)
        .expect("README has an exit-code section");
    let documented: BTreeSet<u8> = table
        .lines()
        .skip_while(|l| !l.starts_with('|'))
        .take_while(|l| l.starts_with('|'))
        .filter_map(|l| l.trim_matches('|').split('|').next()?.trim().parse().ok())
        .collect();
    let defined: BTreeSet<u8> = Exit::ALL.iter().map(|e| e.code()).collect();
    assert_eq!(documented, defined);
}

/// Each command's `--help` ends with its exit codes as `exit::OUTCOMES` writes them, and
/// no other help text writes a code ("Exits 3 when…" drifted from the code before).
#[test]
fn command_help_gives_the_exit_codes_from_one_table() {
    for (name, outcomes) in stepflux::exit::OUTCOMES {
        let out = Command::new(env!("CARGO_BIN_EXE_stepflux"))
            .args([name, "--help"])
            .output()
            .expect("binary runs");
        let help = String::from_utf8_lossy(&out.stdout);
        let codes = stepflux::exit::command_help(outcomes);
        assert!(help.trim_end().ends_with(&codes), "{name} --help:\n{help}");
        let prose = help.trim_end().trim_end_matches(&codes).to_lowercase();
        for word in [
            "exits 0", "exits 1", "exits 2", "exits 3", "exits 4", "exit 2",
        ] {
            assert!(!prose.contains(word), "{name} --help writes \"{word}\"");
        }
    }
}

/// The source files under `root`, relative to it.
fn sources(root: &Path, dir: &Path, out: &mut BTreeSet<String>) {
    for entry in std::fs::read_dir(dir).expect("source folder") {
        let path = entry.expect("entry").path();
        if path.is_dir() {
            sources(root, &path, out);
        } else if path.extension().is_some_and(|e| e == "rs") {
            let rel = path.strip_prefix(root).expect("below root");
            out.insert(rel.to_string_lossy().replace('\\', "/"));
        }
    }
}

/// DEVELOPERS.md's file index lists exactly the source files of each crate (the code
/// map once missed a dozen files).
#[test]
fn file_index_lists_every_source_file() {
    let doc = read("DEVELOPERS.md");
    let index = doc
        .split("## File index")
        .nth(1)
        .and_then(|s| s.split("\n## ").next())
        .expect("DEVELOPERS.md has a file index");
    let manifest = Path::new(env!("CARGO_MANIFEST_DIR"));
    for crate_root in ["engine/src", "models/src", "src"] {
        let heading = format!("**`{crate_root}/`**");
        let listed: BTreeSet<String> = index
            .split(&heading)
            .nth(1)
            .expect("a heading per crate")
            .lines()
            .skip(1)
            .skip_while(|l| l.is_empty())
            .take_while(|l| l.starts_with("- `"))
            .filter_map(|l| Some(l.strip_prefix("- `")?.split('`').next()?.to_string()))
            .collect();
        let mut present = BTreeSet::new();
        let root = manifest.join(crate_root);
        sources(&root, &root, &mut present);
        assert_eq!(listed, present, "file index of {crate_root}/");
    }
}

/// The backticked names in DEVELOPERS.md's "Probe names are" paragraph.
fn documented_probes() -> BTreeSet<String> {
    let doc = read("DEVELOPERS.md");
    let start = doc.find("Probe names are").expect("a probe list");
    let para = &doc[start..];
    let para = &para[..para.find("\n- ").unwrap_or(para.len())];
    para.split('`')
        .skip(1)
        .step_by(2)
        .filter(|s| *s != "part.quantity" && !s.contains('/'))
        .map(str::to_string)
        .collect()
}

#[test]
fn documented_probes_are_the_examples_signals() {
    let mut built = BTreeSet::new();
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios");
    for entry in std::fs::read_dir(&dir).expect("scenarios/") {
        let path = entry.expect("entry").path();
        let name = path.file_name().and_then(|n| n.to_str()).unwrap_or("");
        if !name.ends_with(".json") || name.contains("schema") || name.starts_with("study") {
            continue;
        }
        let out = Command::new(env!("CARGO_BIN_EXE_stepflux"))
            .args(["check", "--json"])
            .arg(&path)
            .output()
            .expect("stepflux runs");
        let v: serde_json::Value = serde_json::from_slice(&out.stdout)
            .unwrap_or_else(|e| panic!("{name}: check --json is not JSON: {e}"));
        for s in v["signals"].as_array().into_iter().flatten() {
            built.insert(s.as_str().unwrap_or_default().to_string());
        }
    }
    assert_eq!(
        documented_probes(),
        built,
        "DEVELOPERS.md probe list vs the built converters"
    );
}
