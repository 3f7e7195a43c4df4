//! Studies from the steady state: the same load-step study (3 lines × 8 Monte Carlo
//! units of the output capacitor, 24 cases, a 4 → 2 A step and its release 1 ms later,
//! judged over 1 ms each) run twice by the binary on one worker: every case started cold, its step at
//! 5 ms after the soft start (the shipped `demo-load-step.json`), and every case
//! started at its periodic steady state (`"analysis": {"start": "steady"}`), its step
//! at 0.2 ms, past the 20-period steady window the ripple is read over. Both runs judge
//! the same step responses; the bench prints the worst step deviation and recovery of
//! each beside the times, so the saving is seen not to change the answer.
//!
//! `cargo bench --bench study_start` (a plain bench: the best of three runs of each,
//! alternated, so both see the same machine load).

use std::path::{Path, PathBuf};
use std::time::Duration;

mod common;
use common::batch_wall;

use serde_json::{json, Value};

const REPEATS: usize = 3;

/// The shipped load-step example, optionally moved to start at its steady state with
/// its disturbances at `step` and `step` + 1 ms, stopping 1 ms after the second.
fn scenario(dir: &Path, steady: bool) -> PathBuf {
    let base = concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/demo-load-step.json");
    let mut v: Value =
        serde_json::from_str(&std::fs::read_to_string(base).expect("example")).expect("json");
    let name = if steady { "steady" } else { "cold" };
    v["name"] = json!(name);
    if steady {
        v["analysis"]["start"] = json!("steady");
        v["analysis"]["stop_time"] = json!("2.2 ms");
        v["disturbances"][0]["load_current"]["time"] = json!("0.2 ms");
        v["disturbances"][1]["load_current"]["time"] = json!("1.2 ms");
    }
    let path = dir.join(format!("{name}.json"));
    std::fs::write(&path, v.to_string()).expect("scenario written");
    path
}

fn study(dir: &Path, base: &Path, name: &str) -> PathBuf {
    let study = json!({
        "name": name,
        "base": base,
        "parameters": {
            "vin": "converter.input.voltage",
            "cout": "converter.output_capacitor.capacitance"
        },
        "corners": { "vin": ["18 V", "24 V", "32 V"] },
        "monte_carlo": { "samples": 8, "seed": 5, "tolerances": { "cout": { "uniform_percent": 20 } } }
    });
    let path = dir.join(format!("{name}-study.json"));
    std::fs::write(&path, study.to_string()).expect("study written");
    path
}

/// The worst value of each step figure and of the output ripple over the study, from
/// its `worst.json`.
fn worst_steps(out: &Path, name: &str) -> Vec<(String, f64)> {
    let text = std::fs::read_to_string(out.join(name).join("worst.json")).expect("worst.json");
    let worst: Value = serde_json::from_str(&text).expect("json");
    let wanted = |k: &str| {
        (k.starts_with("load_step")
            && (k.ends_with("undershoot_pct")
                || k.ends_with(".overshoot_pct")
                || k.ends_with("recovery")))
            || k == "out.v.ripple_pp"
    };
    worst["measurements"]
        .as_object()
        .map(|m| {
            m.iter()
                .filter(|(k, _)| wanted(k))
                .filter_map(|(k, v)| Some((k.clone(), v["value"].as_f64()?)))
                .collect()
        })
        .unwrap_or_default()
}

fn main() {
    let bin = Path::new(env!("CARGO_BIN_EXE_stepflux"));
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("bench_study_start");
    std::fs::create_dir_all(&dir).expect("bench folder");
    let cold = study(&dir, &scenario(&dir, false), "cold");
    let steady = study(&dir, &scenario(&dir, true), "steady");
    let (mut t_cold, mut t_steady) = (Duration::MAX, Duration::MAX);
    for _ in 0..REPEATS {
        t_cold = t_cold.min(batch_wall(bin, &cold, &dir.join("out-cold"), 1));
        t_steady = t_steady.min(batch_wall(bin, &steady, &dir.join("out-steady"), 1));
    }
    println!("load-step study, 24 cases, one worker, best of {REPEATS}:");
    println!(
        "  cold start (5 ms start-up, step at 5 ms):    {:.2} s",
        t_cold.as_secs_f64()
    );
    println!(
        "  steady start (shooting, step at 0.2 ms):    {:.2} s",
        t_steady.as_secs_f64()
    );
    println!(
        "  ratio {:.1}×",
        t_cold.as_secs_f64() / t_steady.as_secs_f64()
    );
    let a = worst_steps(&dir.join("out-cold"), "cold");
    let b = worst_steps(&dir.join("out-steady"), "steady");
    for ((k, x), (_, y)) in a.iter().zip(&b) {
        println!("  worst {k}: cold {x:.6e}, steady {y:.6e}");
    }
}
