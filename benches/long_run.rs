//! Memory of a long run: one million switching periods of the closed-loop demo
//! (`scenarios/demo-load-step.json` with its stop time moved to 6.667 s, i.e. 10⁶
//! periods at 150 kHz) through `stepflux run`, writing decimated waveforms (one sample
//! every 10 µs of six signals, plus every switching instant) to HDF5, then the summary
//! and plots. The figure is the peak resident set of the process (VmHWM, read from
//! /proc while it runs; Linux only). Target: below 200 MB.
//!
//! `cargo bench --bench long_run`
//!
//! The same figure by hand: `/usr/bin/time -v target/release/stepflux run FILE`
//! ("Maximum resident set size") with FILE the scenario this bench writes to
//! `target/tmp/bench_long_run/long-run.json`.

use std::path::PathBuf;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

const PERIODS: f64 = 1e6;
const FREQUENCY: f64 = 150e3;

fn scenario(dir: &std::path::Path) -> PathBuf {
    let base = concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/demo-load-step.json");
    let text = std::fs::read_to_string(base).expect("demo scenario readable");
    let mut s: serde_json::Value = serde_json::from_str(&text).expect("demo scenario is JSON");
    s["name"] = "long-run".into();
    s["analysis"]["stop_time"] = format!("{} s", PERIODS / FREQUENCY).into();
    s["analysis"]["sample_interval"] = "10 us".into();
    if let Some(o) = s.as_object_mut() {
        o.remove("$schema");
    }
    std::fs::create_dir_all(dir).expect("bench folder");
    let path = dir.join("long-run.json");
    std::fs::write(&path, s.to_string()).expect("scenario written");
    path
}

/// Peak resident set of a running process so far, kB (VmHWM).
fn peak_kb(pid: u32) -> Option<u64> {
    let status = std::fs::read_to_string(format!("/proc/{pid}/status")).ok()?;
    let line = status.lines().find(|l| l.starts_with("VmHWM:"))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

fn main() {
    // `cargo bench` passes filter arguments; this bench has no cases to filter.
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("bench_long_run");
    let file = scenario(&dir);
    let out = dir.join("out");
    let start = Instant::now();
    let mut child = Command::new(env!("CARGO_BIN_EXE_stepflux"))
        .arg("run")
        .arg(&file)
        .arg("--out")
        .arg(&out)
        .args(["--quiet", "--jobs", "1"])
        .stdout(Stdio::null())
        .spawn()
        .expect("binary starts");
    let mut peak = 0;
    let status = loop {
        if let Some(kb) = peak_kb(child.id()) {
            peak = peak.max(kb);
        }
        if let Some(status) = child.try_wait().expect("child waits") {
            break status;
        }
        std::thread::sleep(Duration::from_millis(20));
    };
    let elapsed = start.elapsed();
    // 0 all limits met, 1 a limit failed: either way the run completed.
    assert!(matches!(status.code(), Some(0 | 1)), "run failed: {status}");
    let h5 = out.join("long-run").join("waveforms.h5");
    let size = std::fs::metadata(&h5).map_or(0, |m| m.len());
    println!(
        "long_run: {PERIODS:.0} periods ({:.3} s simulated) in {:.1} s ({:.1} µs/period), \
         peak resident memory {:.1} MB, waveforms.h5 {:.1} MB",
        PERIODS / FREQUENCY,
        elapsed.as_secs_f64(),
        elapsed.as_secs_f64() / PERIODS * 1e6,
        peak as f64 / 1024.0,
        size as f64 / 1e6
    );
}
