//! Runs a study's cases on a local thread pool, writing each result file as soon as
//! its case ends. A case that errors — invalid scenario, simulation failure, even a
//! panic — is recorded as errored and the others go on.

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::Mutex;
use std::time::Instant;

use anyhow::{anyhow, Context, Result};
use indicatif::{ProgressBar, ProgressStyle};
use rayon::prelude::*;

use super::cases::{fingerprint, scenario_text, Case};
use super::record::{write_json, CaseRecord, Status};
use super::study::Study;
use crate::budget;
use crate::pipeline::{run_loaded, RunSettings};
use crate::scenario;
use crate::summary::Summary;
use crate::writers::atomic::remove_stale_temporaries;

/// Which cases keep their waveform folder.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum Waveforms {
    /// None: cases run without writing waveforms (fastest).
    None,
    /// Cases that failed a limit or errored; passing cases' folders are deleted.
    Failed,
    /// Every case.
    All,
}

/// How to run.
#[derive(Clone, Copy, Debug)]
pub struct Settings {
    /// Worker threads.
    pub jobs: usize,
    /// Waveform policy.
    pub waveforms: Waveforms,
    /// Reuse existing result files whose fingerprint matches.
    pub resume: bool,
    /// No progress bar.
    pub quiet: bool,
    /// Accept cases past the default cost bounds.
    pub allow_large: bool,
}

/// Where a study's outputs go: `<out>/<study>/`.
#[derive(Clone, Debug)]
pub struct StudyFolder {
    /// The study folder.
    pub dir: PathBuf,
}

impl StudyFolder {
    /// Folder of the case result files.
    pub fn cases(&self) -> PathBuf {
        self.dir.join("cases")
    }

    /// Result file of a case.
    pub fn case_file(&self, id: &str) -> PathBuf {
        self.cases().join(format!("{id}.json"))
    }

    /// Parent of the per-case waveform folders.
    pub fn waveforms(&self) -> PathBuf {
        self.dir.join("waveforms")
    }
}

/// Counts of how the cases went.
#[derive(Debug, Default)]
struct Tally {
    passed: AtomicUsize,
    failed: AtomicUsize,
    errored: AtomicUsize,
}

impl Tally {
    fn add(&self, status: Status) {
        let n = match status {
            Status::Passed => &self.passed,
            Status::Failed => &self.failed,
            Status::Errored => &self.errored,
        };
        n.fetch_add(1, Ordering::Relaxed);
    }

    fn message(&self) -> String {
        format!(
            "passed {} · failed limits {} · errored {}",
            self.passed.load(Ordering::Relaxed),
            self.failed.load(Ordering::Relaxed),
            self.errored.load(Ordering::Relaxed)
        )
    }
}

/// Runs `cases` (skipping those already done when resuming); returns how many were
/// reused from earlier result files.
pub fn run_cases(
    study: &Study,
    cases: &[Case],
    folder: &StudyFolder,
    s: Settings,
) -> Result<usize> {
    std::fs::create_dir_all(folder.cases())
        .with_context(|| format!("creating {}", folder.cases().display()))?;
    if s.resume {
        let stale =
            remove_stale_temporaries(&folder.cases())? + remove_stale_temporaries(&folder.dir)?;
        if stale > 0 && !s.quiet {
            eprintln!("removed {stale} temporary file(s) an earlier run left behind");
        }
    }
    let stop = crate::interrupt::flag();
    let prepared: Vec<(&Case, Result<String, String>)> = cases
        .iter()
        .map(|c| {
            (
                c,
                scenario_text(study, c).map_err(|e| crate::text::one_line(&e)),
            )
        })
        .collect();
    let tally = Tally::default();
    let todo: Vec<_> = prepared
        .iter()
        .filter(|(c, text)| !(s.resume && reusable(folder, c, text, &tally)))
        .collect();
    let reused = cases.len() - todo.len();
    let bar = match s.quiet {
        true => ProgressBar::hidden(),
        false => progress_bar(cases.len(), reused, &tally),
    };
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(s.jobs.max(1))
        .build()
        .context("starting the worker threads")?;
    let write_error: Mutex<Option<anyhow::Error>> = Mutex::new(None);
    pool.install(|| {
        todo.par_iter().for_each(|(case, text)| {
            // After a stop request no case starts, and one cut short leaves no result
            // file, so `--resume` runs it again.
            if stop.load(Ordering::Relaxed) {
                return;
            }
            let Some(record) = run_case(study, case, text, folder, s, stop) else {
                return;
            };
            tally.add(record.status);
            if let Err(e) = write_json(&folder.case_file(&case.id), &record) {
                if let Ok(mut slot) = write_error.lock() {
                    slot.get_or_insert(e);
                }
            }
            bar.set_message(tally.message());
            bar.inc(1);
        })
    });
    bar.finish_and_clear();
    match write_error.into_inner().ok().flatten() {
        Some(e) => Err(e.context("writing a case result")),
        None => Ok(reused),
    }
}

/// An earlier result of exactly this case exists.
fn reusable(
    folder: &StudyFolder,
    case: &Case,
    text: &Result<String, String>,
    tally: &Tally,
) -> bool {
    let Some(old) = CaseRecord::read(&folder.case_file(&case.id)) else {
        return false;
    };
    let same = old.fingerprint == case_fingerprint(text);
    if same {
        tally.add(old.status);
    }
    same
}

fn case_fingerprint(text: &Result<String, String>) -> String {
    match text {
        Ok(t) => fingerprint(t.as_bytes()),
        Err(e) => fingerprint(e.as_bytes()),
    }
}

fn progress_bar(total: usize, done: usize, tally: &Tally) -> ProgressBar {
    // Drawn on stderr, and hidden by indicatif when stderr is not a terminal.
    let bar = ProgressBar::new(total as u64);
    let style = ProgressStyle::with_template(
        "{elapsed_precise} [{bar:30}] {pos}/{len} cases {percent}%, eta {eta_or_unknown} · {msg}",
    )
    .map(|s| {
        s.progress_chars("=> ")
            .with_key("eta_or_unknown", crate::run_cmd::eta_or_unknown)
    })
    .unwrap_or_else(|_| ProgressStyle::default_bar());
    bar.set_style(style);
    bar.set_position(done as u64);
    // Cases reused by `--resume` took no time now: the rate counts from here.
    bar.reset_eta();
    bar.set_message(tally.message());
    bar
}

/// One case, start to end; never panics past this point.
fn run_case(
    study: &Study,
    case: &Case,
    text: &Result<String, String>,
    folder: &StudyFolder,
    s: Settings,
    stop: &'static AtomicBool,
) -> Option<CaseRecord> {
    let started = Instant::now();
    let parameters = study
        .parameters
        .iter()
        .zip(&case.values)
        .map(|(p, &x)| (p.name.clone(), x))
        .collect();
    let name = format!("{}-{}", study.name, case.id);
    let mut record = CaseRecord::new(
        &case.id,
        case.index,
        name,
        case_fingerprint(text),
        parameters,
    );
    match text {
        Err(e) => record.set_error(e.clone()),
        Ok(text) => {
            let label = format!("{} case {}", study.file, case.id);
            let run = catch_unwind(AssertUnwindSafe(|| {
                simulate(text, &label, &folder.waveforms(), s, stop)
            }));
            match run {
                Ok(Ok(summary)) if summary.interrupted.is_some() => return None,
                Ok(Ok(summary)) => record.set_summary(&summary),
                Ok(Err(e)) => record.set_error(crate::text::one_line(&e)),
                Err(panic) => {
                    record.set_error(format!("panic: {}", crate::text::panic_text(&*panic)))
                }
            }
        }
    }
    record.run_time_s = started.elapsed().as_secs_f64();
    Some(record)
}

fn simulate(
    text: &str,
    label: &str,
    waveform_root: &Path,
    s: Settings,
    stop: &'static AtomicBool,
) -> Result<Summary> {
    let policy = s.waveforms;
    let loaded = scenario::load_str(text, label).map_err(|e| anyhow!("{e}"))?;
    budget::enforce(&loaded, s.allow_large).map_err(|e| anyhow!("{e}"))?;
    let settings = RunSettings {
        waveforms: policy != Waveforms::None,
        stop: Some(stop),
    };
    let output = run_loaded(&loaded, waveform_root, &|_| {}, settings)?;
    if policy == Waveforms::Failed && output.summary.passed && output.summary.interrupted.is_none()
    {
        std::fs::remove_dir_all(&output.dir)
            .with_context(|| format!("removing {}", output.dir.display()))?;
    }
    Ok(output.summary)
}
