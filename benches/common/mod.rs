//! What the benches that time the binary share: one `batch` run timed as a whole
//! process, and the median of a set of times.

use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// Wall time of one `binary batch study --out out --jobs jobs`, no waveforms, into an
/// emptied `out`. Exit 0 (all passed) and 1 (a limit failed) both mean every case ran.
pub fn batch_wall(binary: &Path, study: &Path, out: &Path, jobs: usize) -> Duration {
    let _ = std::fs::remove_dir_all(out);
    let t = Instant::now();
    let status = Command::new(binary)
        .arg("batch")
        .arg(study)
        .arg("--out")
        .arg(out)
        .args([
            "--waveforms",
            "none",
            "--quiet",
            "--jobs",
            &jobs.to_string(),
        ])
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .status()
        .expect("binary runs");
    let elapsed = t.elapsed();
    assert!(
        matches!(status.code(), Some(0 | 1)),
        "{} batch failed: {status}",
        binary.display()
    );
    elapsed
}

/// The median of `v` (the upper one of an even count).
#[allow(dead_code)] // not every bench takes medians
pub fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}
