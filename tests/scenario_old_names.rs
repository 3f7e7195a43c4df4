//! Names of the previous release (kebab-case reset choices, a diode's `rd`, `save`,
//! `events`, limits ending in `_percent`) still load for one release: the loaded job is
//! the one the new names give, and each old name is reported once with its field path
//! and the new name. Specification: issue 11, item 3 (one naming style, old names kept
//! one release with a deprecation warning).

use serde_json::{json, Value};
use stepflux::scenario::load_str;

const LOAD_STEP: &str = include_str!("../scenarios/demo-load-step.json");

/// Renames `new` to `old` in `map`, keeping the value.
fn rename(map: &mut Value, new: &str, old: &str) {
    let obj = map.as_object_mut().expect("an object");
    let v = obj.remove(new).unwrap_or_else(|| panic!("{new} present"));
    obj.insert(old.to_string(), v);
}

/// The load-step example written with the previous release's names.
fn old_style() -> Value {
    let mut v: Value = serde_json::from_str(LOAD_STEP).unwrap();
    rename(&mut v, "disturbances", "events");
    v["signals"] = json!(["out.v", "lout.i"]);
    rename(&mut v, "signals", "save");
    rename(
        &mut v["converter"]["reset"],
        "reset_winding",
        "reset-winding",
    );
    rename(&mut v["converter"]["rectifier"], "r_on", "rd");
    rename(
        &mut v["converter"]["reset"]["reset-winding"]["diode"],
        "r_on",
        "rd",
    );
    v["limits"] =
        json!({ "step_deviation_percent": 3, "recovery_time": "200 us", "ripple": "50 mV" });
    v
}

fn warnings(text: &str) -> Vec<String> {
    let loaded = load_str(text, "old.json").expect("old names still load");
    loaded.warnings.iter().map(|w| w.to_string()).collect()
}

#[test]
fn an_old_name_file_loads_with_one_warning_per_old_name() {
    let found = warnings(&old_style().to_string());
    for (field, new) in [
        ("events", "disturbances"),
        ("save", "signals"),
        ("converter.reset.reset-winding", "reset_winding"),
        ("converter.reset.reset-winding.diode.rd", "r_on"),
        ("converter.rectifier.rd", "r_on"),
        ("limits.step_deviation_percent", "step_deviation_pct"),
        ("limits.recovery_time", "step_recovery"),
        ("limits.ripple", "ripple_pp"),
    ] {
        let hit = found
            .iter()
            .filter(|w| w.starts_with(&format!("{field}: ")) && w.contains(&format!("`{new}`")))
            .count();
        assert_eq!(hit, 1, "{field} → {new} once in {found:?}");
    }
}

#[test]
fn old_and_new_names_give_the_same_job() {
    let old = load_str(&old_style().to_string(), "old.json").unwrap();
    let mut new: Value = serde_json::from_str(LOAD_STEP).unwrap();
    new["signals"] = json!(["out.v", "lout.i"]);
    new["limits"] =
        json!({ "step_deviation_pct": 3, "step_recovery": "200 us", "ripple_pp": "50 mV" });
    let new = load_str(&new.to_string(), "new.json").unwrap();
    assert_eq!(old.job.design, new.job.design);
    assert_eq!(
        format!("{:?}", old.job.disturbances),
        format!("{:?}", new.job.disturbances)
    );
    assert_eq!(old.job.signals, new.job.signals);
    assert_eq!(
        format!("{:?}", old.job.limits),
        format!("{:?}", new.job.limits)
    );
    assert_eq!(new.job.limits.ripple, Some(0.05));
}

#[test]
fn the_shipped_examples_use_only_new_names() {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios");
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        let text = std::fs::read_to_string(&path).unwrap();
        let name = path.to_string_lossy();
        if !text.contains("\"converter\"")
            || !name.ends_with(".json")
            || name.ends_with(".schema.json")
        {
            continue;
        }
        let old: Vec<String> = warnings(&text)
            .into_iter()
            .filter(|w| w.contains("deprecated name"))
            .collect();
        assert!(old.is_empty(), "{}: {old:?}", path.display());
    }
}
