//! `stepflux batch` and `stepflux merge`: a study — corners, sweeps and Monte Carlo
//! samples of one base scenario — run in parallel, resumable, shardable.
//!
//! Output of `stepflux batch study.json --out DIR`, under `DIR/<study>/`:
//! - `cases/<id>.json`, one per case, written as soon as it ends (see [`record`]);
//! - `study.json` (name, plan fingerprint, case count, parameters) for `merge`;
//! - `results.csv`, `results.json`, `worst.json` (see [`table`]) and `report.html`
//!   for people (see [`study_report`]);
//! - `waveforms/<study>-<id>/` per `--waveforms`: each case runs with its waveforms and
//!   the folder of a passing case is deleted under `failed` (the default).
//!
//! `--shard I/N` runs the cases whose 0-based index k has k mod N = I − 1: round robin,
//! so each shard gets a share of every corner and similar run time; `--shard-from-env`
//! takes I and N from a job array's task (see [`shard`]). Its tables cover its own
//! cases; `merge` joins shard folders into the tables of the whole study.
//!
//! Exit status: 3 if any case errored (or, for merge, is missing), else 1 if any case
//! failed a limit, else 0.

mod cases;
mod histogram;
mod path;
mod record;
mod runner;
mod shard;
mod study;
mod study_report;
mod table;
mod value;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use anyhow::{anyhow, bail, Context, Result};

use crate::exit::{Exit, ExitWith, Failure};
use cases::Case;
use record::{CaseRecord, Status};
use runner::StudyFolder;
pub use runner::Waveforms;
pub use shard::{Shard, ShardSource};
use table::StudyMeta;

/// Options of `stepflux batch`.
#[derive(Clone, Debug)]
pub struct BatchArgs {
    /// The study file.
    pub study: PathBuf,
    /// Cases run at once (0: one per core).
    pub jobs: usize,
    /// Output root.
    pub out: PathBuf,
    /// Reuse finished cases.
    pub resume: bool,
    /// Which slice to run.
    pub shard: ShardSource,
    /// Waveform policy.
    pub waveforms: Waveforms,
    /// Print the case plan as CSV and run nothing.
    pub list: bool,
    /// No progress bar and no tally.
    pub quiet: bool,
    /// Accept cases past the default cost bounds.
    pub allow_large: bool,
}

/// Loads study `text` and expands its cases, as `batch --list` does; returns the case
/// count. For the fuzz targets and tests that exercise study loading without files.
pub fn plan_text(text: &str, dir: &Path, file: &str) -> Result<usize> {
    let study = study::load_text(text, dir, file)?;
    Ok(cases::plan(&study)?.len())
}

/// `stepflux batch`.
pub fn batch(args: &BatchArgs) -> Result<(), Failure> {
    crate::exit::usable_out(&args.out)?;
    let study = study::load(&args.study)
        .context("study is not valid")
        .exit_with(Exit::BadInput)?;
    let plan = cases::plan(&study)
        .context("expanding the study")
        .exit_with(Exit::BadInput)?;
    let shard = resolve_shard(args.shard, args.quiet || args.list).exit_with(Exit::BadInput)?;
    let slice: Vec<Case> = plan
        .iter()
        .filter(|c| shard.is_none_or(|s| s.contains(c.index)))
        .cloned()
        .collect();
    if args.list {
        print_plan(&study, &slice);
        return Ok(());
    }
    let meta = meta(&study, &plan);
    let folder = StudyFolder {
        dir: args.out.join(&study.name),
    };
    let records = run(&study, &slice, &folder, &meta, args);
    if crate::interrupt::requested() {
        return Err(anyhow!(
            "interrupted by SIGINT or SIGTERM: the finished cases' results are in {}; run \
             the same command with --resume to do the rest",
            folder.cases().display()
        ))
        .exit_with(Exit::Interrupted);
    }
    let records = records.exit_with(Exit::SimulationFailed)?;
    outcome(&folder.dir, &records, &[], args.quiet)
}

/// The shard to run; one read from a job array's environment is named on stderr, so
/// each task's log says which slice it ran.
fn resolve_shard(source: ShardSource, quiet: bool) -> Result<Option<Shard>> {
    match source {
        ShardSource::Whole => Ok(None),
        ShardSource::Given(s) => Ok(Some(s)),
        ShardSource::ArrayEnv => {
            let s = shard::from_array_env(|name| std::env::var(name).ok())
                .context("--shard-from-env: the job-array variables are missing or inconsistent")?;
            if !quiet {
                eprintln!("job-array task: shard {s}");
            }
            Ok(Some(s))
        }
    }
}

fn meta(study: &study::Study, plan: &[Case]) -> StudyMeta {
    StudyMeta {
        study: study.name.clone(),
        description: study.description.clone(),
        plan: cases::plan_fingerprint(study, plan),
        cases: plan.len(),
        parameters: study
            .parameters
            .iter()
            .map(|p| (p.name.clone(), p.path_text.clone()))
            .collect(),
    }
}

fn run(
    study: &study::Study,
    slice: &[Case],
    folder: &StudyFolder,
    meta: &StudyMeta,
    args: &BatchArgs,
) -> Result<Vec<CaseRecord>> {
    std::fs::create_dir_all(&folder.dir)
        .with_context(|| format!("creating {}", folder.dir.display()))?;
    record::write_json(&folder.dir.join("study.json"), meta)?;
    let settings = runner::Settings {
        jobs: match args.jobs {
            0 => default_jobs(),
            n => n,
        },
        waveforms: args.waveforms,
        resume: args.resume,
        quiet: args.quiet,
        allow_large: args.allow_large,
    };
    let reused = runner::run_cases(study, slice, folder, settings)?;
    if reused > 0 && !args.quiet {
        eprintln!("{reused} case(s) reused from earlier results");
    }
    let ids: Vec<String> = slice.iter().map(|c| c.id.clone()).collect();
    let (records, missing) = collect(std::slice::from_ref(&folder.dir), &ids)?;
    if let Some(id) = missing.first() {
        bail!("the result file of case {id} is missing or unreadable after the run");
    }
    table::write_tables(&folder.dir, meta, &records, &[])?;
    Ok(records)
}

fn default_jobs() -> usize {
    std::thread::available_parallelism().map_or(1, |n| n.get())
}

/// The plan as CSV on stdout: id, then each parameter in SI units.
fn print_plan(study: &study::Study, slice: &[Case]) {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    let names: Vec<&str> = study.parameters.iter().map(|p| p.name.as_str()).collect();
    let _ = writeln!(out, "id,{}", names.join(","));
    for c in slice {
        let values: Vec<String> = c.values.iter().map(|x| x.to_string()).collect();
        let _ = writeln!(out, "{},{}", c.id, values.join(","));
    }
}

/// Reads the result files of `ids` from the first of `dirs` holding each; returns the
/// records sorted by index and the ids found nowhere.
fn collect(dirs: &[PathBuf], ids: &[String]) -> Result<(Vec<CaseRecord>, Vec<String>)> {
    let mut records = Vec::new();
    let mut missing = Vec::new();
    for id in ids {
        let found = dirs
            .iter()
            .find_map(|d| CaseRecord::read(&StudyFolder { dir: d.clone() }.case_file(id)));
        match found {
            Some(r) => records.push(r),
            None => missing.push(id.clone()),
        }
    }
    records.sort_by_key(|r| r.index);
    Ok((records, missing))
}

/// Prints the tally and turns it into the exit status.
fn outcome(
    dir: &Path,
    records: &[CaseRecord],
    missing: &[String],
    quiet: bool,
) -> Result<(), Failure> {
    let c = table::counts(records);
    if !quiet {
        print_tally(dir, records.len(), &c, missing.len());
    }
    let has = |s: Status| records.iter().any(|r| r.status == s);
    if has(Status::Errored) || !missing.is_empty() {
        Err(anyhow!(
            "{} case(s) errored or missing",
            c["errored"] + missing.len()
        ))
        .exit_with(Exit::SimulationFailed)
    } else if has(Status::Failed) {
        Err(anyhow!("{} case(s) failed a spec limit", c["failed"])).exit_with(Exit::SpecFailed)
    } else {
        Ok(())
    }
}

/// `stepflux merge`: joins the case results of shard folders into the tables of the
/// whole study under `out/<study>/`. Each folder is a batch `--out` folder or the
/// study folder inside it.
pub fn merge(dirs: &[PathBuf], out: &Path) -> Result<(), Failure> {
    let (meta, study_dirs) = shard_folders(dirs).exit_with(Exit::BadInput)?;
    let width = cases::id_width(meta.cases);
    let ids: Vec<String> = (0..meta.cases).map(|k| cases::case_id(k, width)).collect();
    let dir = out.join(&meta.study);
    let records = (|| -> Result<_> {
        let (records, missing) = collect(&study_dirs, &ids)?;
        std::fs::create_dir_all(&dir).with_context(|| format!("creating {}", dir.display()))?;
        record::write_json(&dir.join("study.json"), &meta)?;
        table::write_tables(&dir, &meta, &records, &missing)?;
        Ok((records, missing))
    })()
    .exit_with(Exit::SimulationFailed)?;
    outcome(&dir, &records.0, &records.1, false)
}

fn print_tally(dir: &Path, n: usize, c: &BTreeMap<&str, usize>, missing: usize) {
    let missing = match missing {
        0 => String::new(),
        m => format!(", {m} missing"),
    };
    println!(
        "{n} cases: {} passed, {} failed a limit, {} errored{missing}",
        c["passed"], c["failed"], c["errored"]
    );
    let ran = c["passed"] + c["failed"] + c["errored"];
    if let Some((lo, hi)) = histogram::wilson(c["passed"], ran, histogram::Z95) {
        println!(
            "  pass rate {} (95 % Wilson interval {} to {})",
            crate::eng::percent(c["passed"] as f64 / ran as f64),
            crate::eng::percent(lo),
            crate::eng::percent(hi)
        );
    }
    println!("  report:  {}", dir.join("report.html").display());
    println!("  results: {}", dir.join("results.csv").display());
    println!("  worst:   {}", dir.join("worst.json").display());
    println!("  {}", crate::summary::CAUTION);
}

/// The study folders among `dirs`, all of one plan.
fn shard_folders(dirs: &[PathBuf]) -> Result<(StudyMeta, Vec<PathBuf>)> {
    let mut found: Vec<(StudyMeta, PathBuf)> = Vec::new();
    for d in dirs {
        found.extend(study_folders_in(d)?);
    }
    let Some((first, _)) = found.first().cloned() else {
        bail!("no study folder (one holding study.json) in the folders given");
    };
    if let Some((other, p)) = found.iter().find(|(m, _)| *m != first) {
        bail!(
            "{} holds a different study or plan ('{}') from '{}'; merge only shards of one study",
            p.display(),
            other.study,
            first.study
        );
    }
    Ok((first, found.into_iter().map(|(_, p)| p).collect()))
}

fn study_folders_in(dir: &Path) -> Result<Vec<(StudyMeta, PathBuf)>> {
    let read = |d: &Path| -> Result<StudyMeta> {
        let p = d.join("study.json");
        let text =
            std::fs::read_to_string(&p).with_context(|| format!("reading {}", p.display()))?;
        serde_json::from_str(&text)
            .with_context(|| format!("{} is not a study record", p.display()))
    };
    if dir.join("study.json").is_file() {
        return Ok(vec![(read(dir)?, dir.to_path_buf())]);
    }
    let entries = std::fs::read_dir(dir).with_context(|| format!("reading {}", dir.display()))?;
    let mut subs: Vec<PathBuf> = entries
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.join("study.json").is_file())
        .collect();
    subs.sort();
    subs.into_iter().map(|p| Ok((read(&p)?, p))).collect()
}

/// `stepflux schema --study`: prints the JSON Schema of the study file.
pub fn print_schema() -> Result<(), Failure> {
    let schema = schemars::schema_for!(study::StudyFile);
    let text = serde_json::to_string_pretty(&schema)
        .context("formatting the schema")
        .exit_with(Exit::SimulationFailed)?;
    println!("{text}");
    Ok(())
}
