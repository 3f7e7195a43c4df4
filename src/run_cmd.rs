//! `stepflux run SCENARIO...`: load each scenario, run the valid ones in parallel, and
//! report each — one bad or failing scenario never stops the others.
//!
//! Exit code: the most severe outcome over all scenarios, in the order simulation
//! failed (3) > bad input (2) > a spec limit failed (1) > all good (0).

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::sync::atomic::Ordering;
use std::time::Duration;

use indicatif::{
    HumanDuration, MultiProgress, ProgressBar, ProgressDrawTarget, ProgressState, ProgressStyle,
};
use rayon::prelude::*;

use crate::exit::{Exit, Failure};
use crate::pipeline::{run_loaded, RunOutput, RunSettings};
use crate::scenario::{self, Loaded};

/// How a run command reports.
#[derive(Clone, Copy, Debug, Default)]
pub struct Reporting {
    /// No progress bars, no per-scenario text (errors still go to stderr).
    pub quiet: bool,
    /// Print one JSON document on stdout instead of text.
    pub json: bool,
}

/// Outcome of one scenario.
enum Outcome {
    Ran(Box<RunOutput>),
    BadInput(String),
    Failed(String),
    /// A stop was requested before this scenario started.
    NotStarted,
}

impl Outcome {
    fn exit(&self) -> Exit {
        match self {
            Outcome::Ran(o) if o.summary.interrupted.is_some() => Exit::Interrupted,
            Outcome::Ran(o) if o.summary.passed => Exit::Ok,
            Outcome::Ran(o) if o.summary.error.is_some() => Exit::SimulationFailed,
            Outcome::Ran(_) => Exit::SpecFailed,
            Outcome::BadInput(_) => Exit::BadInput,
            Outcome::Failed(_) => Exit::SimulationFailed,
            Outcome::NotStarted => Exit::Interrupted,
        }
    }
}

/// Runs every scenario with up to `jobs` in parallel (0: one per core).
pub fn run(
    scenarios: &[PathBuf],
    out: &Path,
    jobs: usize,
    how: Reporting,
    allow_large: bool,
) -> Result<(), Failure> {
    crate::exit::usable_out(out)?;
    // Handlers first: a signal while loading must not kill the process either.
    let stop = crate::interrupt::flag();
    // Everything is loaded before anything runs, so two scenarios that would write one
    // folder are refused while nothing has been written.
    let loaded: Vec<(PathBuf, Result<Loaded, String>)> = scenarios
        .iter()
        .map(|p| (p.clone(), load_one(p, allow_large)))
        .collect();
    refuse_duplicates(&loaded)?;
    let bars = MultiProgress::with_draw_target(if how.quiet || how.json {
        ProgressDrawTarget::hidden()
    } else {
        ProgressDrawTarget::stderr()
    });
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(jobs)
        .build()
        .map_err(|e| Failure {
            exit: Exit::SimulationFailed,
            error: anyhow::anyhow!("starting {jobs} worker threads: {e}"),
        })?;
    let outcomes: Vec<(PathBuf, Outcome)> = pool.install(|| {
        loaded
            .par_iter()
            .map(|(path, l)| {
                let outcome = match l {
                    Err(e) => Outcome::BadInput(e.clone()),
                    Ok(_) if stop.load(Ordering::Relaxed) => Outcome::NotStarted,
                    Ok(l) => one(path, l, out, &bars),
                };
                (path.clone(), outcome)
            })
            .collect()
    });
    report(&outcomes, how);
    let worst = outcomes
        .iter()
        .map(|(_, o)| o.exit())
        .max_by_key(|e| e.severity())
        .unwrap_or(Exit::Ok);
    match worst {
        Exit::Ok => Ok(()),
        Exit::Interrupted => Err(Failure {
            exit: Exit::Interrupted,
            error: anyhow::anyhow!(
                "interrupted by SIGINT or SIGTERM: each run's results up to the stop are in \
                 its folder, its summary.json marked \"interrupted\""
            ),
        }),
        exit => Err(Failure {
            exit,
            error: anyhow::anyhow!(
                "{} of {} scenarios did not pass",
                count_bad(&outcomes),
                outcomes.len()
            ),
        }),
    }
}

fn load_one(path: &Path, allow_large: bool) -> Result<Loaded, String> {
    let loaded = scenario::load(path).map_err(|e| crate::text::one_line(&e.into()))?;
    crate::budget::enforce(&loaded, allow_large).map_err(|e| crate::text::one_line(&e.into()))?;
    Ok(loaded)
}

/// Two scenarios of one name would write one output folder: refused, naming both.
fn refuse_duplicates(loaded: &[(PathBuf, Result<Loaded, String>)]) -> Result<(), Failure> {
    let mut seen: HashMap<&str, &Path> = HashMap::new();
    for (path, l) in loaded {
        let Ok(l) = l else { continue };
        if let Some(first) = seen.insert(l.job.name.as_str(), path) {
            return Err(Failure {
                exit: Exit::BadInput,
                error: anyhow::anyhow!(
                    "{} and {} both have the name \"{}\", and would write the same output \
                     folder; give each scenario its own name (nothing was run)",
                    first.display(),
                    path.display(),
                    l.job.name
                ),
            });
        }
    }
    Ok(())
}

fn count_bad(outcomes: &[(PathBuf, Outcome)]) -> usize {
    outcomes
        .iter()
        .filter(|(_, o)| o.exit() != Exit::Ok)
        .count()
}

/// Runs one loaded scenario; a panic inside the run is caught and reported as a failed
/// simulation so the other scenarios go on.
fn one(path: &Path, loaded: &Loaded, out: &Path, bars: &MultiProgress) -> Outcome {
    for w in &loaded.failures {
        let _ = bars.println(format!(
            "design fails: {}: {w} (simulating it to show how)",
            path.display()
        ));
    }
    for w in &loaded.warnings {
        let _ = bars.println(format!("warning: {}: {w}", path.display()));
    }
    // Progress is simulated time over the stop time, in thousandths; the message says
    // where the run stands in engineering units.
    let bar = bars.add(ProgressBar::new(1000));
    bar.set_style(
        ProgressStyle::with_template(
            "{prefix:>20} [{bar:30}] {percent:>3}% {msg} · {elapsed_precise} · eta {eta_or_unknown}",
        )
        .map(|s| s.with_key("eta_or_unknown", eta_or_unknown))
        .unwrap_or_else(|_| ProgressStyle::default_bar())
        .progress_chars("=> "),
    );
    bar.set_prefix(loaded.job.name.clone());
    let stop = loaded.job.analysis.stop_time;
    let stop_text = crate::eng::eng(stop, "s");
    bar.set_message(format!("t = 0 s of {stop_text}"));
    bar.enable_steady_tick(Duration::from_millis(500));
    let progress = |f: f64| {
        bar.set_position((1000.0 * f) as u64);
        bar.set_message(format!(
            "t = {} of {stop_text}",
            crate::eng::eng(f * stop, "s")
        ));
    };
    let result = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
        run_loaded(loaded, out, &progress, RunSettings::interactive())
    }));
    bar.finish_and_clear();
    match result {
        Ok(Ok(output)) => Outcome::Ran(Box::new(output)),
        Ok(Err(e)) => Outcome::Failed(crate::text::one_line(&e)),
        Err(panic) => Outcome::Failed(format!(
            "internal error (panic): {}",
            crate::text::panic_text(&*panic)
        )),
    }
}

/// The bar's remaining time, or "?" while nothing has been done to estimate it from
/// (indicatif reads 0 s then, which looked like a run about to end).
pub(crate) fn eta_or_unknown(state: &ProgressState, w: &mut dyn std::fmt::Write) {
    let unknown = state.eta().is_zero() && state.len().is_some_and(|n| state.pos() < n);
    let _ = match unknown {
        true => write!(w, "?"),
        false => write!(w, "{:#}", HumanDuration(state.eta())),
    };
}

const NOT_STARTED: &str = "not started: a stop was requested (SIGINT or SIGTERM)";

fn report(outcomes: &[(PathBuf, Outcome)], how: Reporting) {
    if how.json {
        let doc: Vec<serde_json::Value> = outcomes
            .iter()
            .map(|(path, o)| {
                let mut v = serde_json::json!({ "scenario_file": path.display().to_string(), "exit_code": o.exit().code() });
                match o {
                    Outcome::Ran(r) => {
                        v["summary"] = serde_json::to_value(&r.summary).unwrap_or_default();
                        v["output"] = serde_json::json!(r.dir.display().to_string());
                    }
                    Outcome::BadInput(e) | Outcome::Failed(e) => v["error"] = serde_json::json!(e),
                    Outcome::NotStarted => v["error"] = serde_json::json!(NOT_STARTED),
                }
                v
            })
            .collect();
        println!("{}", serde_json::to_string_pretty(&doc).unwrap_or_default());
        return;
    }
    for (path, o) in outcomes {
        match o {
            Outcome::Ran(r) if !how.quiet => crate::print::run_summary(r),
            Outcome::Ran(_) => {}
            // The message already names the file and the spot in it.
            Outcome::BadInput(e) => eprintln!("error: {e}"),
            Outcome::Failed(e) => eprintln!("error: {}: simulation failed: {e}", path.display()),
            Outcome::NotStarted => eprintln!("error: {}: {NOT_STARTED}", path.display()),
        }
    }
}
