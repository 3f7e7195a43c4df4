//! Loading specifications: the example files mean what their README says, defaults are
//! the documented ones, and no input — however mangled — makes loading panic.

use proptest::prelude::*;
use stepflux_models::demo_design::{demo_controller, demo_design};

use super::*;
use crate::job::{Drive, Start};

const DEMO: &str = include_str!("../../scenarios/demo-startup.json");

fn loaded(text: &str) -> Loaded {
    load_str(text, "test.json").unwrap_or_else(|e| panic!("{e}"))
}

#[test]
fn demo_startup_file_is_the_demo_design_and_controller() {
    // Source: scenarios/README.md says demo-startup.json holds the values of
    // `demo_design()` and `demo_controller()`; equality is exact because every value in
    // the file is a decimal whose nearest double is what the Rust literal gives.
    let l = loaded(DEMO);
    assert_eq!(l.job.design, demo_design());
    assert_eq!(l.job.drive, Drive::Controller(demo_controller()));
    assert_eq!(l.job.analysis.start, Start::Zero);
    assert!(l.warnings.is_empty(), "{:?}", l.warnings);
    assert_eq!(l.job.source_text, DEMO);
}

/// The demo file with `converter.<part>` replaced.
fn with_part(part: &str, value: serde_json::Value) -> String {
    let mut v: serde_json::Value = serde_json::from_str(DEMO).unwrap();
    v["converter"][part] = value;
    v.to_string()
}

#[test]
fn omitted_parasitics_are_zero_and_off_resistance_is_ten_megohm() {
    let text = with_part(
        "rectifier",
        serde_json::json!({ "vf": "0.4 V", "rd": "10m", "reverse_rating": "45 V" }),
    );
    let l = loaded(&text);
    let d = &l.job.design.rectifier;
    assert_eq!(d.junction_capacitance, 0.0);
    assert_eq!(d.r_off, validate::DEFAULT_R_OFF);
    assert_eq!(validate::DEFAULT_R_OFF, 10e6);
    assert_eq!(l.job.design.transformer.primary_leakage, 0.0);
    assert_eq!(l.job.bias_power, 0.15);
}

#[test]
fn every_reset_scheme_builds_with_its_own_probes() {
    let diode = serde_json::json!({ "vf": "0.7 V", "rd": "0.1", "reverse_rating": "150 V" });
    let switch = serde_json::json!({ "r_on": "50m", "voltage_rating": "100 V" });
    for (reset, probe) in [
        (
            serde_json::json!({ "rcd_clamp": { "diode": diode, "resistance": "1k", "capacitor": { "capacitance": "100n" } } }),
            "clamp.v",
        ),
        (
            serde_json::json!({ "two_switch": { "high_side": switch, "clamp_diode": diode } }),
            "sw.hi.v",
        ),
        (
            serde_json::json!({ "reset_winding": { "turns": 12, "diode": diode } }),
            "reset.i",
        ),
    ] {
        let l = loaded(&with_part("reset", reset));
        assert!(
            l.probes.iter().any(|p| p == probe),
            "{probe}: {:?}",
            l.probes
        );
    }
}

#[test]
fn warnings_carry_the_numbers() {
    // A 4 µH inductor: ripple (5.4 V)(0.7)/(150 kHz · 4 µH) = 6.3 A p-p, above half the
    // 4 A load (Erickson & Maksimović §2.3 ripple relation).
    let text = with_part(
        "output_inductor",
        serde_json::json!({ "inductance": "4 uH", "saturation_current": "8 A" }),
    );
    let l = loaded(&text);
    let w = l
        .warnings
        .iter()
        .find(|w| w.field == "converter.output_inductor.inductance")
        .expect("ripple warning");
    assert!(w.message.contains("6.300 A p-p"), "{w}");
}

#[test]
fn schema_lists_every_template_and_refuses_unknown_fields() {
    let text = json_schema().to_string();
    for tag in [
        "reset_winding",
        "rcd_clamp",
        "two_switch",
        "active_clamp",
        "open_loop",
        "poles_zeros",
    ] {
        assert!(text.contains(tag), "{tag}");
    }
    assert!(text.contains("\"additionalProperties\":false"));
}

/// Byte and token edits that keep a scenario close to valid, where a loader is most
/// likely to reach a code path nobody tried.
fn mutate(text: &str, edits: &[(usize, u8, String)]) -> String {
    let mut s = text.as_bytes().to_vec();
    for (pos, kind, token) in edits {
        let at = pos % (s.len() + 1);
        match kind % 4 {
            0 => s.truncate(at),
            1 => {
                if at < s.len() {
                    s.remove(at);
                }
            }
            2 => {
                s.splice(at..at, token.bytes());
            }
            _ => {
                // Replace the next JSON value-ish run with the token.
                let end = s[at..]
                    .iter()
                    .position(|b| matches!(b, b',' | b'}' | b']'))
                    .map_or(s.len(), |k| at + k);
                s.splice(at..end, token.bytes());
            }
        }
    }
    String::from_utf8_lossy(&s).into_owned()
}

fn token() -> impl Strategy<Value = String> {
    prop_oneof![
        Just("\"\"".to_string()),
        Just("0".to_string()),
        Just("-1".to_string()),
        Just("1e308".to_string()),
        Just("\"1e400 V\"".to_string()),
        Just("\"4k7k\"".to_string()),
        Just("\"R\"".to_string()),
        Just("null".to_string()),
        Just("[]".to_string()),
        Just("{}".to_string()),
        Just("\"..\"".to_string()),
        Just("{\"states\": [1e300, -1e300]}".to_string()),
        "[ -~]{0,12}".prop_map(|s| format!("\"{s}\"")),
        any::<f64>().prop_map(|v| v.to_string()),
    ]
}

proptest! {
    // Each case builds a circuit when the text still parses, so keep the count modest.
    #![proptest_config(ProptestConfig { cases: 300, ..ProptestConfig::default() })]

    #[test]
    fn mutated_scenarios_never_panic(edits in prop::collection::vec((any::<usize>(), any::<u8>(), token()), 1..4)) {
        let _ = load_str(&mutate(DEMO, &edits), "fuzz.json");
    }

    #[test]
    fn arbitrary_text_never_panics(text in "\\PC{0,200}") {
        let _ = load_str(&text, "fuzz.json");
    }

    #[test]
    fn any_number_in_any_field_never_panics(field in 0usize..40, value in prop_oneof![any::<f64>().prop_map(|v| v.to_string()), token()]) {
        // Replace the field-th string value of the demo with the value.
        let mut count = 0;
        let mut out = String::new();
        let mut rest = DEMO;
        while let Some(start) = rest.find(": \"") {
            let (head, tail) = rest.split_at(start + 2);
            out.push_str(head);
            let close = tail[1..].find('"').map_or(tail.len(), |k| k + 2);
            if count == field {
                out.push_str(&value);
            } else {
                out.push_str(&tail[..close]);
            }
            count += 1;
            rest = &tail[close..];
        }
        out.push_str(rest);
        let _ = load_str(&out, "fuzz.json");
    }
}
