//! Batch scaling: one 64-case study (2 loads × 4 lines × 8 Monte Carlo units of the
//! demo start-up, 1 ms each, no waveforms) run by the binary on 1 and on 2 worker
//! threads. The ratio of the two times is the parallel speed-up (target ≥ 1.8 on a
//! machine with two idle cores).
//!
//! `cargo bench --bench batch_scaling`

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Duration;

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};

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

fn run(study: &Path, out: &Path, jobs: usize) {
    let status = Command::new(env!("CARGO_BIN_EXE_stepflux"))
        .arg("batch")
        .arg(study)
        .arg("--out")
        .arg(out)
        .args(["--waveforms", "none", "--jobs", &jobs.to_string()])
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .status()
        .expect("binary runs");
    // 0 all passed, 1 a limit failed; both mean every case ran.
    assert!(
        matches!(status.code(), Some(0 | 1)),
        "batch failed: {status}"
    );
}

fn scaling(c: &mut Criterion) {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("bench_batch_scaling");
    let study = study(&dir);
    let mut group = c.benchmark_group("batch_64_cases");
    group.sample_size(10);
    group.measurement_time(Duration::from_secs(40));
    for jobs in [1, 2] {
        let out = dir.join(format!("jobs{jobs}"));
        group.bench_with_input(BenchmarkId::new("jobs", jobs), &jobs, |b, &jobs| {
            b.iter(|| run(&study, &out, jobs))
        });
    }
    group.finish();
}

criterion_group!(benches, scaling);
criterion_main!(benches);
