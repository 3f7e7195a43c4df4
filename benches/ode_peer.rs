//! One closed-loop scenario end to end against a general-purpose ODE script of the same
//! converter: `stepflux run scenarios/demo-startup.json` (process start, building the
//! circuit and its topologies, 5 ms of start-up under the controller, measurements,
//! HDF5, summary and plots) against `benches/peer/forward_closed_loop.py`, the same
//! converter read from the same file as switched ODEs under scipy's Radau (rtol 1e-10,
//! event location, one solver call per interval between switching instants; its
//! simplifications all make it cheaper, see its docstring). Both are timed as whole
//! processes in one run of this bench, alternated; both answers (the output voltage at
//! the end, the time to 90 %) are printed beside the times.
//!
//! `pip install numpy scipy`, then `cargo bench --bench ode_peer` (a plain bench: the
//! best of five runs of stepflux and two of the
//! peer, alternated; without scipy it says so and measures stepflux alone).

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

use serde_json::Value;

/// Runs of stepflux (fractions of a second each) and of the peer (about a minute).
const REPEATS: usize = 5;
const PEER_REPEATS: usize = 2;

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

/// Wall time of one `stepflux run` of the demo start-up, and its time to 90 %.
fn stepflux(out: &Path) -> (Duration, f64) {
    let _ = std::fs::remove_dir_all(out);
    let t = Instant::now();
    let status = Command::new(env!("CARGO_BIN_EXE_stepflux"))
        .args(["run", "--quiet", "--jobs", "1", "--out"])
        .arg(out)
        .arg(root().join("scenarios/demo-startup.json"))
        .status()
        .expect("binary runs");
    let elapsed = t.elapsed();
    assert!(status.success(), "stepflux run failed: {status}");
    let summary: Value = serde_json::from_str(
        &std::fs::read_to_string(out.join("demo-startup/summary.json")).expect("summary"),
    )
    .expect("json");
    let t90 = summary["measurements"]
        .as_array()
        .and_then(|m| m.iter().find(|f| f["name"] == "startup.t90"))
        .and_then(|f| f["value"].as_f64())
        .unwrap_or(f64::NAN);
    (elapsed, t90)
}

/// Wall time of one peer run and what it printed, or why it could not run.
fn peer() -> Result<(Duration, Value), String> {
    let t = Instant::now();
    let out = Command::new("python3")
        .arg(root().join("benches/peer/forward_closed_loop.py"))
        .arg(root().join("scenarios/demo-startup.json"))
        .output()
        .map_err(|e| format!("python3 does not start: {e}"))?;
    let elapsed = t.elapsed();
    if !out.status.success() {
        return Err(String::from_utf8_lossy(&out.stderr).into_owned());
    }
    let answer = serde_json::from_slice(&out.stdout).map_err(|e| e.to_string())?;
    Ok((elapsed, answer))
}

fn main() {
    let out = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("bench_ode_peer");
    let (mut ours, mut theirs) = (Duration::MAX, Duration::MAX);
    let (mut t90, mut answer) = (f64::NAN, Value::Null);
    for k in 0..REPEATS {
        let (t, x) = stepflux(&out);
        (ours, t90) = (ours.min(t), x);
        if k >= PEER_REPEATS {
            continue;
        }
        match peer() {
            Ok((t, a)) => (theirs, answer) = (theirs.min(t), a),
            Err(why) => {
                println!("peer not run (pip install numpy scipy): {why}");
                break;
            }
        }
    }
    println!(
        "closed-loop demo start-up, 5 ms, whole process (best of {REPEATS} and {PEER_REPEATS}):"
    );
    println!(
        "  stepflux run:                 {:8.3} s   t90 {:.4e} s",
        ours.as_secs_f64(),
        t90
    );
    if theirs != Duration::MAX {
        println!(
            "  scipy Radau script (peer):    {:8.3} s   t90 {:.4e} s, vout at the end {:.4} V, {} solver calls",
            theirs.as_secs_f64(),
            answer["t90_s"].as_f64().unwrap_or(f64::NAN),
            answer["vout_end_v"].as_f64().unwrap_or(f64::NAN),
            answer["solver_calls"]
        );
        println!("  ratio {:.0}×", theirs.as_secs_f64() / ours.as_secs_f64());
    }
}
