//! Names of the previous release that still load, for one release, with a warning.
//!
//! The raw types accept each old name as a serde alias; this module finds the old names
//! in the parsed document so the warning can give the field path and the new name.
//! Remove an entry here together with its alias in [`super::raw`].

use serde_json::Value;

use stepflux_models::job::review::Finding;

/// Old top-level keys and their new names.
const TOP: &[(&str, &str)] = &[("events", "disturbances"), ("save", "signals")];

/// Old limit names and the new ones, named after the figures they bound.
const LIMITS: &[(&str, &str)] = &[
    ("startup_overshoot_percent", "startup_overshoot_pct"),
    ("startup_time", "startup_t90"),
    ("step_deviation_percent", "step_deviation_pct"),
    ("recovery_time", "step_recovery"),
    ("recovery_band_percent", "step_band_pct"),
    ("ripple", "ripple_pp"),
    ("reset_margin_percent", "reset_margin_pct"),
    ("flux_margin_percent", "flux_margin_pct"),
    ("efficiency_percent", "efficiency_pct"),
];

/// Old reset choice names (kebab-case) and the snake_case ones.
const RESET: &[(&str, &str)] = &[
    ("reset-winding", "reset_winding"),
    ("rcd-clamp", "rcd_clamp"),
    ("two-switch", "two_switch"),
    ("active-clamp", "active_clamp"),
];

/// One warning per old name in the scenario document `doc`, in document order.
pub fn warnings(doc: &Value) -> Vec<Finding> {
    let mut out = Vec::new();
    renamed(doc, "", TOP, &mut out);
    if let Some(limits) = doc.get("limits") {
        renamed(limits, "limits", LIMITS, &mut out);
    }
    if let Some(reset) = doc.get("converter").and_then(|c| c.get("reset")) {
        renamed(reset, "converter.reset", RESET, &mut out);
    }
    diode_resistance(doc, "", &mut out);
    out
}

/// Whether limit keys `a` and `b` name the same limit (equal, or old and new name).
pub fn same_limit(a: &str, b: &str) -> bool {
    a == b
        || LIMITS
            .iter()
            .any(|(old, new)| (a == *old && b == *new) || (a == *new && b == *old))
}

fn renamed(node: &Value, at: &str, names: &[(&str, &str)], out: &mut Vec<Finding>) {
    let Some(map) = node.as_object() else { return };
    for (old, new) in names {
        if map.contains_key(*old) {
            out.push(deprecation(&join(at, old), new));
        }
    }
}

/// A diode's forward resistance was `rd`; it is `r_on`, the engine's name. Diodes sit
/// at several depths (rectifier, body diodes, clamp diodes), so every object with a
/// forward threshold `vf` and an `rd` is one.
fn diode_resistance(node: &Value, at: &str, out: &mut Vec<Finding>) {
    let Some(map) = node.as_object() else { return };
    if map.contains_key("vf") && map.contains_key("rd") {
        out.push(deprecation(&join(at, "rd"), "r_on"));
    }
    for (key, child) in map {
        diode_resistance(child, &join(at, key), out);
    }
}

fn join(at: &str, key: &str) -> String {
    match at.is_empty() {
        true => key.to_string(),
        false => format!("{at}.{key}"),
    }
}

fn deprecation(field: &str, new: &str) -> Finding {
    Finding {
        field: field.to_string(),
        message: format!("deprecated name, still read in this release; write `{new}` instead"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_old_name_is_reported_at_its_path_with_the_new_name() {
        let doc = serde_json::json!({
            "save": ["out.v"],
            "events": [],
            "converter": {
                "reset": { "rcd-clamp": { "diode": { "vf": "0.7", "rd": "0.1" } } },
                "rectifier": { "vf": "0.5", "rd": "0.02" }
            },
            "limits": { "ripple": "50 mV", "startup_overshoot_percent": 5 }
        });
        let found: Vec<String> = warnings(&doc).iter().map(|w| w.to_string()).collect();
        for (field, new) in [
            ("events", "disturbances"),
            ("save", "signals"),
            ("limits.startup_overshoot_percent", "startup_overshoot_pct"),
            ("limits.ripple", "ripple_pp"),
            ("converter.reset.rcd-clamp", "rcd_clamp"),
            ("converter.reset.rcd-clamp.diode.rd", "r_on"),
            ("converter.rectifier.rd", "r_on"),
        ] {
            assert!(
                found.iter().any(
                    |w| w.starts_with(&format!("{field}: ")) && w.contains(&format!("`{new}`"))
                ),
                "{field} → {new} missing from {found:?}"
            );
        }
        assert_eq!(found.len(), 7, "{found:?}");
    }

    #[test]
    fn new_names_raise_no_warning() {
        let doc = serde_json::json!({
            "signals": ["out.v"],
            "disturbances": [],
            "converter": { "reset": { "rcd_clamp": { "diode": { "vf": "0.7", "r_on": "0.1" } } } },
            "limits": { "ripple_pp": "50 mV" }
        });
        assert!(warnings(&doc).is_empty());
    }
}
