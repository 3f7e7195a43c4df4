//! End-to-end checks of the `stepflux` binary: exit codes and the HDF5
//! file the demo writes.

use h5::types::VarLenUnicode;
use hdf5_metno as h5;

mod common;
use common::{example, scratch, stepflux};

fn unit_of(file: &h5::File, name: &str) -> String {
    let unit: VarLenUnicode = file
        .dataset(name)
        .and_then(|d| d.attr("unit"))
        .and_then(|a| a.read_scalar())
        .unwrap_or_else(|e| panic!("unit attribute of {name}: {e}"));
    unit.as_str().to_owned()
}

fn read(file: &h5::File, name: &str) -> Vec<f64> {
    file.dataset(name)
        .and_then(|d| d.read_raw())
        .unwrap_or_else(|e| panic!("dataset {name}: {e}"))
}

#[test]
fn demo_writes_waveforms_cycle_table_summary_and_plots() {
    let out = scratch("demo_ok");
    let status = stepflux()
        .args(["demo", "--out"])
        .arg(&out)
        .status()
        .expect("binary runs");
    // Source: README.md "Exit codes" (0 ok: the demo meets its own limits).
    assert_eq!(status.code(), Some(0));

    let dir = out.join("demo");
    let file = h5::File::open(dir.join("waveforms.h5")).expect("demo file exists");
    let time = read(&file, "time");
    let vout = read(&file, "out.v");
    assert_eq!(time.len(), vout.len());
    assert!(time.len() > 1000);
    // Switching instants are saved besides the fixed interval, so two samples may
    // share an instant; time never goes back.
    assert!(
        time.windows(2).all(|w| w[1] >= w[0]),
        "time must not decrease"
    );
    assert_eq!(unit_of(&file, "time"), "s");
    assert_eq!(unit_of(&file, "out.v"), "V");
    assert_eq!(unit_of(&file, "lout.i"), "A");
    assert_eq!(unit_of(&file, "core.b"), "T");
    // The regulated output: Vref·(1 + Rtop/Rbot) = 2.5 V · 2 = 5 V for the demo
    // controller (the divider relation; demo values are our own). The last sample
    // lies within the ripple and load-step recovery of it: 2 %.
    let last = *vout.last().expect("samples");
    assert!((last - 5.0).abs() < 0.1, "final output {last} V");
    let duty = read(&file, "cycles/duty");
    assert!(duty.len() > 1000, "one record per switching cycle");
    assert!(
        duty.iter().all(|d| (0.0..=0.45 + 1e-9).contains(d)),
        "duty within the clamp"
    );
    let scenario: VarLenUnicode = file
        .attr("scenario")
        .and_then(|a| a.read_scalar())
        .expect("scenario attribute");
    assert!(!scenario.as_str().is_empty());

    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).expect("summary"))
            .expect("json");
    assert_eq!(summary["passed"], serde_json::Value::Bool(true));
    assert!(summary["measurements"]
        .as_array()
        .is_some_and(|m| !m.is_empty()));
    for plot in ["output.svg", "primary.svg", "duty.svg"] {
        let svg = std::fs::read_to_string(dir.join("plots").join(plot)).expect("plot written");
        assert!(svg.starts_with("<svg"), "{plot} is an SVG file");
    }
}

#[test]
fn output_path_that_is_a_file_is_bad_input() {
    let dir = scratch("demo_bad_out");
    std::fs::create_dir_all(&dir).expect("scratch dir");
    let not_a_dir = dir.join("plain_file");
    std::fs::write(&not_a_dir, b"x").expect("write file");
    let output = stepflux()
        .args(["demo", "--out"])
        .arg(&not_a_dir)
        .output()
        .expect("binary runs");
    // Source: README.md "Exit codes" (2 bad input).
    assert_eq!(output.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(stderr.contains("not a directory"), "stderr: {stderr}");
}

/// `run` and `batch` classify an unusable `--out` as `demo` does: bad input, exit 2
/// (README "Exit codes"); batch used to exit 3.
#[test]
fn run_and_batch_refuse_a_file_as_output_folder_with_exit_2() {
    let dir = scratch("run_batch_bad_out");
    std::fs::create_dir_all(&dir).expect("scratch dir");
    let not_a_dir = dir.join("plain_file");
    std::fs::write(&not_a_dir, b"x").expect("write file");
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios");
    for (command, input) in [
        ("run", "demo-startup.json"),
        ("batch", "study_corners.json"),
    ] {
        let output = stepflux()
            .arg(command)
            .arg(root.join(input))
            .arg("--out")
            .arg(&not_a_dir)
            .output()
            .expect("binary runs");
        let stderr = String::from_utf8_lossy(&output.stderr);
        assert_eq!(output.status.code(), Some(2), "{command}: {stderr}");
        assert!(stderr.contains("not a directory"), "{command}: {stderr}");
    }
}

#[test]
fn unknown_option_is_bad_input() {
    let status = stepflux()
        .args(["demo", "--no-such-option"])
        .stderr(std::process::Stdio::null())
        .status()
        .expect("binary runs");
    assert_eq!(status.code(), Some(2));
}

/// A reader that stops early (`stepflux check scenario.json | head -1`) ends the
/// process quietly, as with any Unix tool: no panic message on stderr (there was one:
/// "failed printing to stdout: Broken pipe"). `check` prints its first lines, then
/// times a trial run before the rest, so the pipe is closed while it still writes.
#[test]
fn a_closed_stdout_is_not_a_panic() {
    use std::io::Read;
    use std::process::Stdio;
    let mut child = stepflux()
        .arg("check")
        .arg(example("demo-startup.json"))
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("binary runs");
    let mut first = [0u8; 10];
    let mut stdout = child.stdout.take().expect("stdout");
    stdout.read_exact(&mut first).expect("the check starts");
    drop(stdout);
    let output = child.wait_with_output().expect("binary ends");
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(!stderr.contains("panicked"), "stderr: {stderr}");
}
