//! The shipped 48-case corners study (`scenarios/study_corners.json`: 3 line voltages ×
//! 2 loads × 8 Monte Carlo units, 5 ms start-up each) end to end on one
//! worker with no waveforms, as a whole process: process start, every case's build
//! and topologies, stepping, measurements, tables and the study page.
//!
//! Before and after in one run: set `STEPFLUX_BEFORE` to another build of the binary
//! (for instance one built from the commit a cost target was set against) and,
//! if its study file differs, `STEPFLUX_BEFORE_STUDY` to that file; the two are run
//! alternately and the ratio of each pair printed. Without it the bench times this
//! build alone.
//!
//! `cargo bench --bench corners_study` (a plain bench: seven alternated pairs).

use std::path::{Path, PathBuf};

mod common;
use common::{batch_wall, median};

const PAIRS: usize = 7;

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn main() {
    let out = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("bench_corners_study");
    let ours = PathBuf::from(env!("CARGO_BIN_EXE_stepflux"));
    let study = root().join("scenarios/study_corners.json");
    let before = std::env::var_os("STEPFLUX_BEFORE").map(PathBuf::from);
    let before_study =
        std::env::var_os("STEPFLUX_BEFORE_STUDY").map_or(study.clone(), PathBuf::from);
    let load = std::fs::read_to_string("/proc/loadavg").unwrap_or_default();
    let (mut now, mut then, mut ratios) = (Vec::new(), Vec::new(), Vec::new());
    for _ in 0..PAIRS {
        let a = batch_wall(&ours, &study, &out.join("now"), 1).as_secs_f64();
        now.push(a);
        if let Some(b) = &before {
            let b = batch_wall(b, &before_study, &out.join("before"), 1).as_secs_f64();
            then.push(b);
            ratios.push(b / a);
        }
    }
    println!(
        "corners study, 48 cases, one worker, no waveforms, whole process (load average before: {}):",
        load.split_whitespace().take(3).collect::<Vec<_>>().join(" ")
    );
    println!("  this build:   {:.3} s (median of {PAIRS})", median(now));
    if before.is_some() {
        println!(
            "  before:       {:.3} s (median of {PAIRS}, alternated)",
            median(then)
        );
        println!(
            "  before / now: {:.2}× (median of the pairs, {:.2}–{:.2}×)",
            median(ratios.clone()),
            ratios.iter().cloned().fold(f64::INFINITY, f64::min),
            ratios.iter().cloned().fold(0.0, f64::max)
        );
    } else {
        println!("  (set STEPFLUX_BEFORE to another build to time it alongside)");
    }
}
