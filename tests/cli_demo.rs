//! End-to-end checks of the `stepflux` binary: exit codes and the HDF5
//! file the demo writes.

use std::path::PathBuf;
use std::process::Command;

use h5::types::VarLenUnicode;
use hdf5_metno as h5;

fn stepflux() -> Command {
    Command::new(env!("CARGO_BIN_EXE_stepflux"))
}

fn scratch(name: &str) -> PathBuf {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join(name);
    // Stale output from an earlier run must not satisfy the assertions.
    let _ = std::fs::remove_dir_all(&dir);
    dir
}

fn unit_of(file: &h5::File, name: &str) -> String {
    let unit: VarLenUnicode = file
        .dataset(name)
        .and_then(|d| d.attr("unit"))
        .and_then(|a| a.read_scalar())
        .unwrap_or_else(|e| panic!("unit attribute of {name}: {e}"));
    unit.as_str().to_owned()
}

#[test]
fn demo_writes_time_and_signal_with_units() {
    let out = scratch("demo_ok");
    let status = stepflux()
        .args(["demo", "--out"])
        .arg(&out)
        .status()
        .expect("binary runs");
    // Source: README.md "Exit codes" (0 ok).
    assert_eq!(status.code(), Some(0));

    let file = h5::File::open(out.join("demo/waveforms.h5")).expect("demo file exists");
    let time: Vec<f64> = file
        .dataset("time")
        .and_then(|d| d.read_raw())
        .expect("time");
    let ring: Vec<f64> = file
        .dataset("ringing")
        .and_then(|d| d.read_raw())
        .expect("ringing");
    assert_eq!(time.len(), ring.len());
    assert!(time.len() > 1);
    assert!(time.windows(2).all(|w| w[1] > w[0]), "time must increase");
    assert_eq!(unit_of(&file, "time"), "s");
    assert_eq!(unit_of(&file, "ringing"), "V");

    // Expected values from the definition of a decaying sine,
    // exp(-t/tau)·sin(2πft): zero at t = 0, and bounded by the envelope.
    assert_eq!(ring[0], 0.0);
    let tau = 200e-6;
    for (t, v) in time.iter().zip(&ring) {
        assert!(
            v.abs() <= (-t / tau).exp() + 1e-12,
            "exceeds envelope at t={t}"
        );
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

#[test]
fn unknown_option_is_bad_input() {
    let status = stepflux()
        .args(["demo", "--no-such-option"])
        .stderr(std::process::Stdio::null())
        .status()
        .expect("binary runs");
    assert_eq!(status.code(), Some(2));
}
