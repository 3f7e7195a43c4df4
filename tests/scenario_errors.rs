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
                "converter.transformer.primary_turn: unknown field `primary_turn`; allowed: \
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
            edit(|v| v["disturbances"] = json!([{ "line": { "time": "1 ms", "to": "20 V", "slew": "1 A/us" } }])),
            &["disturbances[0].line.slew: \"1 A/us\" is not a valid voltage slew rate"],
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
            edit(|v| v["converter"]["reset"]["reset_winding"]["diode"]["r_on"] = json!(0)),
            &["converter.reset.reset_winding.diode.r_on = 0 is not allowed; expected a finite value > 0"],
        ),
        case(
            "unknown_scheme",
            edit(|v| v["converter"]["reset"] = json!({ "flyback": {} })),
            &["converter.reset: expected one choice: an object with exactly one key, one of \
               `reset_winding`, `rcd_clamp`, `two_switch`, `active_clamp`; found an object with \
               the one key `flyback`"],
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
            edit(|v| v["signals"] = json!(["out.v", "vout"])),
            &["signals[1]: unknown signal \"vout\"; this converter has: in.v, in.i, out.v"],
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
            &["drive.controller.mode = \"alternating\" is not allowed; expected \"single_ended\" for the reset_winding template", "would drive nothing"],
        ),
        case(
            "reference_step_open_loop",
            edit(|v| {
                v["drive"] = json!({ "open_loop": { "frequency": "150 kHz", "duty": 0.3 } });
                v["disturbances"] = json!([{ "reference": { "time": "1 ms", "to": "3 V" } }]);
            }),
            &["disturbances[0].reference: infeasible: a reference step needs the controller drive"],
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
        // Choices written as something other than one known key: the choice's path, the
        // allowed names, and what was found, in this format's words.
        case(
            "choice_empty",
            edit(|v| v["converter"]["reset"] = json!({})),
            &["converter.reset: expected one choice: an object with exactly one key, one of \
               `reset_winding`, `rcd_clamp`, `two_switch`, `active_clamp`; found an empty object {}"],
        ),
        case(
            "choice_two_keys",
            edit(|v| {
                let winding = v["converter"]["reset"]["reset_winding"].clone();
                v["converter"]["reset"] = json!({ "reset_winding": winding, "two_switch": {} });
            }),
            &["converter.reset: expected one choice", "found an object with 2 key(s): `reset_winding`, `two_switch`"],
        ),
        case(
            "choice_as_text",
            edit(|v| v["converter"]["reset"] = json!("reset_winding")),
            &["converter.reset: expected one choice", "found the text \"reset_winding\""],
        ),
        case(
            "choice_wrong_type",
            edit(|v| v["drive"] = json!(5)),
            &["drive: expected one choice: an object with exactly one key, one of `open_loop`, \
               `controller`; found the number 5"],
        ),
        case(
            "unit_or_object_choice",
            edit(|v| v["analysis"]["start"] = json!("states")),
            &["analysis.start: expected one choice: the text \"zero\", \"steady\", or an object \
               with exactly one key, one of `states`, `values`; found the text \"states\""],
        ),
        case(
            "text_choice",
            edit(|v| v["drive"]["controller"]["mode"] = json!("push-pull")),
            &["drive.controller.mode: expected one choice: one of the texts \"single_ended\", \
               \"alternating\"; found the text \"push-pull\""],
        ),
        // Shapes: the deserializer's vocabulary ("struct Scenario with 10 elements",
        // "newtype variant") must not leak.
        case(
            "top_level_array",
            "[]".into(),
            &["top_level_array.json:1:2: (top level): expected an object with the fields \
               analysis, bias_power, converter", "found an empty list []"],
        ),
        case(
            "struct_as_number",
            edit(|v| v["converter"]["transformer"] = json!(3)),
            &["converter.transformer: expected an object with the fields", "found the number 3"],
        ),
        case(
            "list_for_a_value",
            edit(|v| v["converter"]["transformer"]["primary_turns"] = json!([1])),
            &["converter.transformer.primary_turns: expected a plain number, or a string with \
               an optional SI prefix, e.g. \"10k\"; found a list of 1 item(s)"],
        ),
        case(
            "text_for_a_list",
            edit(|v| v["signals"] = json!("out.v")),
            &["signals: expected a list [ … ]; found the text \"out.v\""],
        ),
        case(
            "bool_for_a_power",
            edit(|v| v["bias_power"] = json!(true)),
            &["bias_power: expected a power in watts (W), as a number in SI units or text with \
               a unit; found true"],
        ),
        // Echoed values are cut near one terminal line (src/text.rs ECHO_MAX = 80).
        case(
            "long_value",
            edit(|v| v["name"] = json!("x".repeat(1_000_000))),
            &["name = \"xxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxxx…\" (1000002 characters) is not allowed"],
        ),
        // Values many decades outside practice are refused where they are read, with the
        // band (src/bounds.rs) shown.
        case(
            "denormal_capacitance",
            edit(|v| v["converter"]["output_capacitor"]["capacitance"] = json!(5e-324)),
            &["converter.output_capacitor.capacitance: 5e-324 is outside the capacitance \
               stepflux can compute with: magnitudes 1 fF to 10 kF"],
        ),
        case(
            "huge_voltage",
            edit(|v| v["converter"]["input"]["voltage"] = json!(1e308)),
            &["converter.input.voltage: 1e308 is outside the voltage", "1 µV to 1 MV"],
        ),
        case(
            "glacial_clock",
            edit(|v| v["drive"]["controller"]["oscillator"]["frequency"] = json!("1e-30 Hz")),
            &["drive.controller.oscillator.frequency: 1e-30 is outside the frequency", "1 mHz to 1 GHz"],
        ),
        case(
            "fractional_turns",
            edit(|v| v["converter"]["transformer"]["secondary_turns"] = json!(0.01)),
            &["converter.transformer.secondary_turns = 0.01 is not allowed; expected 1 to 10000"],
        ),
        // The demo switches at 150 kHz: one period is 6.67 µs.
        case(
            "shorter_than_a_period",
            edit(|v| v["analysis"]["stop_time"] = json!("3 us")),
            &["analysis.stop_time = 0.000003 s is not allowed; expected at least one switching \
               period, 6.666666666666667e-6 s"],
        ),
        // Default cost bounds (src/budget.rs): 1e8 periods, 10 GB of waveforms.
        case(
            "too_many_periods",
            edit(|v| {
                v["analysis"]["stop_time"] = json!("1000 s");
                v["analysis"]["sample_interval"] = json!("1 ms");
            }),
            // 1000 s × 150 kHz = 1.5e8 periods.
            &["analysis.stop_time = 1000 s (1.500e8 switching periods) is not allowed; expected \
               at most 1e8 periods per run, or pass --allow-large"],
        ),
        case(
            "too_much_output",
            edit(|v| {
                v["analysis"]["stop_time"] = json!("1 s");
                v["analysis"]["sample_interval"] = json!("1 ps");
            }),
            &["analysis.sample_interval = 0.000000000001 s (1.000e12 samples per signal", "expected at most 10.00 GB of waveforms per run, or pass --allow-large"],
        ),
        case(
            "limit_out_of_range",
            edit(|v| v["limits"]["flux_margin_pct"] = json!(120)),
            &["limits.flux_margin_pct = 120 is not allowed; expected 0 to 100"],
        ),
    ]
}

#[test]
fn range_errors_carry_the_line_and_column_of_the_field() {
    // Pretty-printed with keys in alphabetical order: "name" is a top-level key at two
    // spaces' indent, so its value starts after `  "name": `, at column 11.
    let text = edit(|v| v["name"] = json!("../x"));
    let line = 1 + text
        .lines()
        .position(|l| l.trim_end_matches(',') == "  \"name\": \"../x\"")
        .expect("name line");
    let stderr = check_fails("range_position", &text);
    let expected = format!("range_position.json:{line}:11: name = \"../x\"");
    assert!(stderr.contains(&expected), "{expected} in {stderr}");
}

#[test]
fn a_byte_order_mark_is_accepted() {
    let path = scratch_file("with_bom", &format!("\u{feff}{DEMO}"));
    let out = Command::new(env!("CARGO_BIN_EXE_stepflux"))
        .arg("check")
        .arg(&path)
        .output()
        .expect("binary runs");
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn invalid_utf8_names_the_byte_and_its_offset() {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("scenario_errors");
    std::fs::create_dir_all(&dir).expect("scratch dir");
    let path = dir.join("latin1.json");
    // "é" in Latin-1 (0xE9) inside the name on line 2: `{\n  "name": "caf` is 16 bytes,
    // 14 characters of them on line 2, so the byte is at column 15.
    std::fs::write(&path, b"{\n  \"name\": \"caf\xE9\"\n}\n").expect("write");
    let out = Command::new(env!("CARGO_BIN_EXE_stepflux"))
        .arg("check")
        .arg(&path)
        .output()
        .expect("binary runs");
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(
        stderr.contains("latin1.json:2:15: not UTF-8 text: byte 0xE9 at byte offset 16"),
        "{stderr}"
    );
}

#[test]
fn allow_large_lets_a_large_run_pass_check_with_its_estimate() {
    let path = scratch_file(
        "allowed_large",
        &edit(|v| {
            v["analysis"]["stop_time"] = json!("1000 s");
            v["analysis"]["sample_interval"] = json!("1 ms");
        }),
    );
    let out = Command::new(env!("CARGO_BIN_EXE_stepflux"))
        .args(["check", "--allow-large"])
        .arg(&path)
        .output()
        .expect("binary runs");
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        // 1.5e8 periods, in engineering notation (src/eng.rs).
        stdout.contains("run cost estimate: 150 M switching periods"),
        "{stdout}"
    );
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
