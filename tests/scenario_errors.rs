//! Bad scenarios through the binary: each must exit 2 (README "Exit codes": bad input)
//! with a message that names where the problem is and what is allowed. The expected
//! texts are this format's specification (scenarios/README.md "Errors"); positions are
//! counted by hand in the inline texts.

use std::path::PathBuf;
use std::process::Command;

use serde_json::{json, Value};

const DEMO: &str = include_str!("../scenarios/demo-startup.json");

fn demo() -> Value {
    serde_json::from_str(DEMO).expect("demo scenario parses")
}

fn scratch_file(name: &str, text: &str) -> PathBuf {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("scenario_errors");
    std::fs::create_dir_all(&dir).expect("scratch dir");
    let path = dir.join(format!("{name}.json"));
    std::fs::write(&path, text).expect("write scenario");
    path
}

/// Runs `check` on `text`; returns stderr, asserting exit code 2 and empty stdout.
fn check_fails(name: &str, text: &str) -> String {
    let path = scratch_file(name, text);
    let out = Command::new(env!("CARGO_BIN_EXE_stepflux"))
        .arg("check")
        .arg(&path)
        .output()
        .expect("binary runs");
    let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
    assert_eq!(out.status.code(), Some(2), "{name}: {stderr}");
    assert!(out.stdout.is_empty(), "{name}: stdout not empty");
    stderr
}

fn edit(f: impl FnOnce(&mut Value)) -> String {
    let mut v = demo();
    f(&mut v);
    serde_json::to_string_pretty(&v).expect("serialise")
}

struct Case {
    name: &'static str,
    text: String,
    expect: Vec<&'static str>,
}

fn case(name: &'static str, text: String, expect: &[&'static str]) -> Case {
    Case {
        name,
        text,
        expect: expect.to_vec(),
    }
}

fn cases() -> Vec<Case> {
    vec![
        case(
            "malformed",
            "{\n  \"name\": \"x\",\n  \"converter\": ,\n}\n".into(),
            &["malformed.json:3:16: malformed JSON: expected value"],
        ),
        case(
            "truncated",
            "{\n  \"name\": \"x\",\n".into(),
            &["truncated.json:3:1: malformed JSON: EOF while parsing a value"],
        ),
        case(
            "trailing",
            format!("{DEMO}}}\n"),
            &["malformed JSON: text after the end of the scenario object"],
        ),
        case(
            "unknown_field",
            edit(|v| v["converter"]["transformer"]["primary_turn"] = json!(12)),
            &[
                "converter.transformer.primary_turn: unknown field `primary_turn`, expected one of \
                 `primary_turns`, `secondary_turns`, `magnetising_inductance`",
            ],
        ),
        case(
            "missing_field",
            edit(|v| {
                v["converter"].as_object_mut().map(|o| o.remove("load"));
            }),
            &["converter: missing field `load`"],
        ),
        case(
            "wrong_unit",
            edit(|v| v["converter"]["output_capacitor"]["capacitance"] = json!("220 uH")),
            &[
                "converter.output_capacitor.capacitance: \"220 uH\" is not a valid capacitance: \
                 \"uH\" measures inductance in henries (H), not capacitance; expected farads (F)",
                "e.g. \"220 uF\"",
            ],
        ),
        case(
            "wrong_slew_unit",
            edit(|v| v["events"] = json!([{ "line": { "time": "1 ms", "to": "20 V", "slew": "1 A/us" } }])),
            &["events[0].line.slew: \"1 A/us\" is not a valid voltage slew rate"],
        ),
        case(
            "not_a_number",
            edit(|v| v["converter"]["transformer"]["primary_turns"] = json!("twelve")),
            &["converter.transformer.primary_turns: \"twelve\" is not a valid plain number: it does not start with a number"],
        ),
        case(
            "out_of_range",
            edit(|v| v["converter"]["output_inductor"]["inductance"] = json!("-15 uH")),
            &["converter.output_inductor.inductance = -0.000015 is not allowed; expected a finite value > 0"],
        ),
        case(
            "reset_field_range",
            edit(|v| v["converter"]["reset"]["reset-winding"]["diode"]["rd"] = json!(0)),
            &["converter.reset.reset-winding.diode.rd = 0 is not allowed; expected a finite value > 0"],
        ),
        case(
            "unknown_scheme",
            edit(|v| v["converter"]["reset"] = json!({ "flyback": {} })),
            &["converter.reset: unknown variant `flyback`, expected one of `reset-winding`, `rcd-clamp`, `two-switch`, `active-clamp`"],
        ),
        case(
            "path_traversal_name",
            edit(|v| v["name"] = json!("../x")),
            &["name = \"../x\" is not allowed; expected letters, digits, '-', '_' and '.', not starting with '.'"],
        ),
        case(
            "hidden_name",
            edit(|v| v["name"] = json!(".x")),
            &["name = \".x\" is not allowed"],
        ),
        case(
            "unknown_signal",
            edit(|v| v["save"] = json!(["out.v", "vout"])),
            &["save[1]: unknown signal \"vout\"; this converter has: in.v, in.i, out.v"],
        ),
        // A duty above the reset limit and a drain stress above a rating used to be
        // refused here; they are designs that fail, simulated and shown failing
        // (tests/verdicts.rs, check exits 1).
        case(
            "switch_r_off_not_above_r_on",
            edit(|v| v["converter"]["switch"]["r_off"] = json!("10 mΩ")),
            &["converter.switch.r_off = 0.01 is not allowed; expected a value above r_on = 0.05 Ω"],
        ),
        case(
            "diode_r_off_not_above_rd",
            edit(|v| v["converter"]["rectifier"]["r_off"] = json!("5 mΩ")),
            &["converter.rectifier.r_off = 0.005 is not allowed; expected a value above rd = 0.01 Ω"],
        ),
        case(
            "alternating_single_gate",
            edit(|v| v["drive"]["controller"]["mode"] = json!("alternating")),
            &["drive.controller.mode = \"alternating\" is not allowed; expected \"single_ended\" for the reset-winding template", "would drive nothing"],
        ),
        case(
            "reference_step_open_loop",
            edit(|v| {
                v["drive"] = json!({ "open_loop": { "frequency": "150 kHz", "duty": 0.3 } });
                v["events"] = json!([{ "reference": { "time": "1 ms", "to": "3 V" } }]);
            }),
            &["events[0].reference: infeasible: a reference step needs the controller drive"],
        ),
        case(
            "wrong_state_count",
            edit(|v| v["analysis"]["start"] = json!({ "states": [0.0, 0.0] })),
            &["analysis.start.states = 2 values is not allowed; expected", "one per dynamic state"],
        ),
        case(
            "sample_interval_above_stop",
            edit(|v| v["analysis"]["sample_interval"] = json!("10 ms")),
            &["analysis.sample_interval = 0.01 is not allowed; expected at most stop_time = 0.005 s"],
        ),
        case(
            "lockout_inverted",
            edit(|v| v["drive"]["controller"]["lockout"]["stop"] = json!("17 V")),
            &["drive.controller.lockout.stop = 17 is not allowed; expected between 0 and start = 16 V"],
        ),
        case(
            "compensation_shape",
            edit(|v| v["drive"]["controller"]["voltage_loop"]["compensation"]["poles_zeros"]["poles"] = json!(["36 kHz"])),
            &["drive.controller.voltage_loop.compensation.poles_zeros:", "not a type I, II or III shape"],
        ),
        case(
            "limit_out_of_range",
            edit(|v| v["limits"]["flux_margin_percent"] = json!(120)),
            &["limits.flux_margin_percent = 120 is not allowed; expected 0 to 100"],
        ),
    ]
}

#[test]
fn each_bad_scenario_exits_2_with_its_message() {
    let all = cases();
    assert!(all.len() >= 12);
    let mut failures = Vec::new();
    for c in &all {
        let stderr = check_fails(c.name, &c.text);
        for key in &c.expect {
            if !stderr.contains(key) {
                failures.push(format!("{}: missing {key:?} in:\n{stderr}", c.name));
            }
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
}

#[test]
fn a_missing_file_exits_2_with_the_os_reason() {
    let out = Command::new(env!("CARGO_BIN_EXE_stepflux"))
        .args(["check", "no/such/scenario.json"])
        .output()
        .expect("binary runs");
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr.contains("cannot read scenario no/such/scenario.json"),
        "{stderr}"
    );
    assert!(stderr.contains("caused by:"), "{stderr}");
}
