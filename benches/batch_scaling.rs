//! Batch scaling: one 64-case study (2 loads × 4 lines × 8 Monte Carlo units of the
//! demo start-up, 1 ms each, no waveforms) run by the binary on 1 and on 2 worker
//! threads, alternated, as whole processes. The ratio of the two times is the parallel
//! speed-up (target ≥ 1.8 on a machine with two idle cores); the bench prints how idle
//! the processors were just before and just after (a busy second core takes the gain
//! away, so a figure without it means little).
//!
//! `cargo bench --bench batch_scaling` (a plain bench: five alternated pairs).

use std::path::{Path, PathBuf};
use std::time::Duration;

mod common;
use common::{batch_wall, median};

fn study(dir: &Path) -> PathBuf {
    let base = concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/demo-startup.json");
    let study = serde_json::json!({
        "name": "scaling",
        "base": base,
        "parameters": {
            "vin": "converter.input.voltage",
            "rload": "converter.load.resistance",
            "stop": "analysis.stop_time",
            "cout": "converter.output_capacitor.capacitance"
        },
        "corners": {
            "vin": ["18 V", "22 V", "26 V", "32 V"],
            "rload": ["1R25", "2R5"],
            "stop": ["1 ms"]
        },
        "monte_carlo": { "samples": 8, "seed": 3, "tolerances": { "cout": { "uniform_percent": 20 } } }
    });
    std::fs::create_dir_all(dir).expect("bench folder");
    let path = dir.join("study.json");
    std::fs::write(&path, study.to_string()).expect("study written");
    path
}

/// Busy and total jiffies of all processors since boot (`/proc/stat`, first line).
fn cpu_jiffies() -> Option<(u64, u64)> {
    let stat = std::fs::read_to_string("/proc/stat").ok()?;
    let fields: Vec<u64> = stat
        .lines()
        .next()?
        .split_whitespace()
        .skip(1)
        .filter_map(|f| f.parse().ok())
        .collect();
    let total: u64 = fields.iter().sum();
    let idle = fields.get(3)? + fields.get(4).unwrap_or(&0);
    Some((total - idle, total))
}

/// How busy the processors were over `seconds` of quiet (this bench not running).
fn idle_share(seconds: u64) -> Option<f64> {
    let (b0, t0) = cpu_jiffies()?;
    std::thread::sleep(Duration::from_secs(seconds));
    let (b1, t1) = cpu_jiffies()?;
    Some(1.0 - (b1 - b0) as f64 / (t1 - t0).max(1) as f64)
}

fn main() {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("bench_batch_scaling");
    let study = study(&dir);
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    let before = idle_share(3);
    let load = std::fs::read_to_string("/proc/loadavg").unwrap_or_default();
    let bin = Path::new(env!("CARGO_BIN_EXE_stepflux"));
    let _ = batch_wall(bin, &study, &dir.join("warm-up"), 2);
    let (mut one, mut two, mut ratios) = (Vec::new(), Vec::new(), Vec::new());
    for _ in 0..PAIRS {
        let a = batch_wall(bin, &study, &dir.join("jobs1"), 1).as_secs_f64();
        let b = batch_wall(bin, &study, &dir.join("jobs2"), 2).as_secs_f64();
        one.push(a);
        two.push(b);
        ratios.push(a / b);
    }
    let after = idle_share(3);
    let share = |s: Option<f64>| s.map_or("unknown".to_string(), |v| format!("{:.0} %", 100.0 * v));
    println!("batch scaling, 64 cases of 1 ms, no waveforms ({cores} processors):");
    println!(
        "  machine idle before {} and after {} (share of processor time no process used, 3 s each); load average before: {}",
        share(before),
        share(after),
        load.split_whitespace().take(3).collect::<Vec<_>>().join(" ")
    );
    println!(
        "  1 worker {:.3} s, 2 workers {:.3} s (medians of {PAIRS}, alternated); speed-up {:.2}× (median of the pairs, {:.2}–{:.2}×)",
        median(one),
        median(two),
        median(ratios.clone()),
        ratios.iter().cloned().fold(f64::INFINITY, f64::min),
        ratios.iter().cloned().fold(0.0, f64::max),
    );
}

/// Alternated pairs (1 worker, then 2) timed.
const PAIRS: usize = 5;
