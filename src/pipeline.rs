//! Runs one [`Job`]: builds the converter and its drive, streams waveforms and cycle
//! records to `waveforms.h5`, measures as it goes, then writes `summary.json` and the
//! plots. A failure part-way still closes the waveform file and writes the summary
//! with the error, so nothing already computed is lost.

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

use anyhow::{Context, Result};
use stepflux_models::job::build::Built;
use stepflux_models::job::run::{JobRun, Reached, Recorder};
use stepflux_models::job::verdict::verdicts;
use stepflux_models::runaway::Runaway;

use crate::job::{Job, Start};
use crate::scenario::Loaded;
use crate::steady::SteadyReport;
use crate::summary::{design_figures, Interruption, Summary, CAUTION};
use crate::writers::atomic::write_json;
use crate::writers::{html, plots, waveforms::WaveformSink};

/// Fewest progress slices per run: often enough for a smooth bar.
const MIN_SLICES: f64 = 200.0;
/// Most switching periods per slice: a slice is also how long a stop request waits
/// (2000 periods are well under a second at the bench's per-period cost).
const PERIODS_PER_SLICE: f64 = 2000.0;
/// Most slices: bounds the slice table of a run allowed past the default bounds.
const MAX_SLICES: f64 = 1e6;
/// Wall seconds between flushes of the waveform file to disk, so a killed process
/// leaves a file readable up to its last flush (DEVELOPERS.md "Cross-cutting concerns").
const FLUSH_EVERY_S: f64 = 10.0;

/// What a finished run left behind.
pub struct RunOutput {
    /// The run's folder.
    pub dir: PathBuf,
    /// The summary as written.
    pub summary: Summary,
    /// Plot files written.
    pub plots: Vec<PathBuf>,
}

/// What a run writes besides its measurements.
#[derive(Clone, Copy, Debug)]
pub struct RunSettings {
    /// Write the run's folder (waveforms, summary, plots). When false nothing is
    /// written and only the returned summary remains, as a batch of many runs wants.
    pub waveforms: bool,
    /// Raised to stop the run at the next slice, keeping what was computed.
    pub stop: Option<&'static AtomicBool>,
}

impl RunSettings {
    /// A run from the command line: its folder written, stopped by SIGINT or SIGTERM.
    pub fn interactive() -> Self {
        RunSettings {
            waveforms: true,
            stop: Some(crate::interrupt::flag()),
        }
    }
}

/// How the simulation loop ended without an error.
enum Ended {
    /// At the stop time.
    Finished,
    /// At a stop request, at this simulated time.
    Interrupted(f64),
    /// Where the magnetising current ran away past the saturation knee.
    Runaway(Runaway),
}

/// Runs a job into `out_root/<job name>/`, calling `progress` with the fraction done.
pub fn run_job(job: &Job, out_root: &Path, progress: &(dyn Fn(f64) + Sync)) -> Result<RunOutput> {
    run_job_with(job, out_root, progress, RunSettings::interactive())
}

/// [`run_job`] with explicit [`RunSettings`].
pub fn run_job_with(
    job: &Job,
    out_root: &Path,
    progress: &(dyn Fn(f64) + Sync),
    settings: RunSettings,
) -> Result<RunOutput> {
    run(job, None, out_root, progress, settings)
}

/// [`run_job_with`] for a loaded scenario, going on from the converter its checks
/// built.
pub fn run_loaded(
    loaded: &Loaded,
    out_root: &Path,
    progress: &(dyn Fn(f64) + Sync),
    settings: RunSettings,
) -> Result<RunOutput> {
    run(
        &loaded.job,
        Some(&loaded.built),
        out_root,
        progress,
        settings,
    )
}

fn run(
    job: &Job,
    built: Option<&Built>,
    out_root: &Path,
    progress: &(dyn Fn(f64) + Sync),
    settings: RunSettings,
) -> Result<RunOutput> {
    let started = Instant::now();
    let dir = out_root.join(&job.name);
    if settings.waveforms {
        std::fs::create_dir_all(dir.join("plots"))
            .with_context(|| format!("creating {}", dir.display()))?;
    }
    let steady = match job.analysis.start {
        Start::Steady => {
            Some(stepflux_models::job::steady::find_for_run(job).map_err(|e| anyhow::anyhow!(e))?)
        }
        _ => None,
    };
    let run = match built {
        Some(b) => JobRun::from_built(job, b.clone(), steady.as_ref()),
        None => JobRun::new(job, steady.as_ref()),
    };
    let mut run = run
        .map_err(|e| anyhow::anyhow!(e))
        .context("building the converter")?;
    let probes: Vec<(String, &str)> = run
        .probes()
        .iter()
        .map(|p| (p.name.clone(), p.unit))
        .collect();
    let kept = saved_indices(job, &probes);
    let h5_path = dir.join("waveforms.h5");
    let mut file = match settings.waveforms {
        true => Some(WaveformSink::create(
            &h5_path,
            &probes,
            &kept,
            &run.switchable_names(),
            &job.source_text,
        )?),
        false => None,
    };
    let outcome = simulate(job, &mut run, &mut file, progress, settings.stop);
    let samples = file.as_ref().map_or(0, |f| f.samples());
    let file_result = file.map_or(Ok(()), |f| f.finish());
    let mut results = run.results(job);
    if job.limits.on_loop_gain() {
        results
            .figures
            .extend(stepflux_models::job::loop_figures::loop_figures(job));
        results.verdicts = verdicts(&job.limits, &results.figures);
    }
    let stopped = match &outcome {
        Ok(Ended::Runaway(r)) => Some(r.to_string()),
        _ => None,
    };
    let interrupted = match &outcome {
        Ok(Ended::Interrupted(at)) => Some(Interruption::at(*at)),
        _ => None,
    };
    let finished =
        outcome.is_ok() && file_result.is_ok() && stopped.is_none() && interrupted.is_none();
    let mut summary = Summary {
        scenario: job.name.clone(),
        tool: format!("stepflux {}", env!("CARGO_PKG_VERSION")),
        run_time_s: started.elapsed().as_secs_f64(),
        simulated_time_s: results.simulated,
        samples,
        design: design_figures(job),
        passed: finished && results.reset_passed && results.verdicts.iter().all(|v| v.pass),
        measurements: results.figures,
        verdicts: results.verdicts,
        stopped,
        error: None,
        steady_state: steady.as_ref().map(SteadyReport::from),
        interrupted,
        caution: CAUTION,
    };
    if let Err(e) = &outcome {
        summary.error = Some(crate::text::one_line(e));
    }
    if let Err(e) = &file_result {
        summary
            .error
            .get_or_insert_with(|| crate::text::one_line(e));
    }
    summary.explain_missing();
    if !settings.waveforms {
        outcome?;
        return Ok(RunOutput {
            dir,
            summary,
            plots: Vec::new(),
        });
    }
    let summary_path = dir.join("summary.json");
    write_json(&summary_path, &summary)?;
    let ended = outcome?;
    file_result?;
    let plots = match ended {
        Ended::Finished => write_plots(&h5_path, &dir, &probes, &kept, job, worst_reset(&summary))?,
        // A run stopped early may hold too little to plot; the summary and the
        // waveform file are what matter then.
        Ended::Interrupted(_) | Ended::Runaway(_) => {
            write_plots(&h5_path, &dir, &probes, &kept, job, worst_reset(&summary))
                .unwrap_or_default()
        }
    };
    html::write_run_report(&dir, &summary, &plots, &job.source_text)?;
    Ok(RunOutput {
        dir,
        summary,
        plots,
    })
}

/// Runs `run` to the job's stop time in slices, between which it reports progress,
/// honours a stop request and checkpoints the waveform file.
fn simulate(
    job: &Job,
    run: &mut JobRun,
    file: &mut Option<WaveformSink>,
    progress: &(dyn Fn(f64) + Sync),
    stop_flag: Option<&AtomicBool>,
) -> Result<Ended> {
    let stop = job.analysis.stop_time;
    let periods = stop * job.design_point().frequency;
    let slices = (periods / PERIODS_PER_SLICE)
        .ceil()
        .clamp(MIN_SLICES, MAX_SLICES) as usize;
    let mut flushed = Instant::now();
    for slice in run.slices(slices) {
        if stop_flag.is_some_and(|f| f.load(Ordering::Relaxed)) {
            run.finish(recorder(file));
            return Ok(Ended::Interrupted(run.time()));
        }
        if flushed.elapsed().as_secs_f64() >= FLUSH_EVERY_S {
            if let Some(f) = file.as_mut() {
                f.checkpoint()?;
            }
            flushed = Instant::now();
        }
        match run.advance(slice, recorder(file)) {
            Ok(Reached::End) => {}
            Ok(Reached::Runaway(r)) => {
                run.finish(recorder(file));
                return Ok(Ended::Runaway(r));
            }
            Err(e) => {
                return Err(anyhow::anyhow!(e))
                    .with_context(|| format!("simulating '{}'", job.name));
            }
        }
        progress(slice.until / stop);
    }
    run.finish(recorder(file));
    Ok(Ended::Finished)
}

/// The waveform file as the run's recorder, when there is one.
fn recorder(file: &mut Option<WaveformSink>) -> Option<&mut dyn Recorder> {
    file.as_mut().map(|f| f as &mut dyn Recorder)
}

fn saved_indices(job: &Job, probes: &[(String, &str)]) -> Vec<usize> {
    if job.signals.is_empty() {
        return (0..probes.len()).collect();
    }
    probes
        .iter()
        .enumerate()
        .filter(|(_, (n, _))| job.signals.iter().any(|s| s == n))
        .map(|(k, _)| k)
        .collect()
}

/// The standard plots, for whichever of their signals were saved, with the limits the
/// design knows drawn on their panels (switch rating, Bsat, the reset duty limit).
fn write_plots(
    h5: &Path,
    dir: &Path,
    probes: &[(String, &str)],
    kept: &[usize],
    job: &Job,
    worst: Option<(f64, u64)>,
) -> Result<Vec<PathBuf>> {
    let saved = |name: &str| kept.iter().any(|&k| probes[k].0 == name);
    let d = &job.design;
    let marker = |value: f64, label: &str| plots::Marker {
        value,
        label: label.into(),
    };
    let reset_limit = job.design_figures().reset_limit_duty;
    let panel = |signal: &str, markers: Vec<plots::Marker>| plots::Panel {
        signal: signal.into(),
        markers,
    };
    let primary = || {
        vec![
            panel(
                "drain.v",
                vec![marker(d.switch.voltage_rating, "switch rating")],
            ),
            plots::Panel::of("mag.i"),
            panel(
                "core.b",
                vec![marker(d.transformer.saturation_flux_density, "Bsat")],
            ),
        ]
    };
    let sets: [(&str, &str, &str, Vec<plots::Panel>); 3] = [
        (
            "output.svg",
            "time",
            "Output voltage and inductor current",
            vec![plots::Panel::of("out.v"), plots::Panel::of("lout.i")],
        ),
        (
            "primary.svg",
            "time",
            "Drain voltage, magnetising current and flux density",
            primary(),
        ),
        (
            "duty.svg",
            "cycles/start",
            "Duty per cycle",
            vec![panel(
                "cycles/duty",
                reset_limit
                    .map(|v| marker(v, "reset limit"))
                    .into_iter()
                    .collect(),
            )],
        ),
    ];
    let mut written = Vec::new();
    for (file, x, title, panels) in sets {
        let present: Vec<plots::Panel> = panels
            .into_iter()
            .filter(|p| p.signal.starts_with("cycles/") || saved(&p.signal))
            .collect();
        if present.is_empty() {
            continue;
        }
        let path = dir.join("plots").join(file);
        let what = plots::Plot {
            x,
            window: (None, None),
            title,
        };
        plots::plot(h5, &what, &present, &path)?;
        written.push(path);
    }
    if let Some((time, cycle)) = worst {
        // Two periods before the tightest cycle's turn-on and three after: its reset
        // and the cycles either side.
        let period = 1.0 / job.design_point().frequency;
        let present: Vec<plots::Panel> =
            primary().into_iter().filter(|p| saved(&p.signal)).collect();
        if !present.is_empty() {
            let path = dir.join("plots").join("worst-reset.svg");
            let title = format!(
                "Tightest reset: cycle {cycle}, t = {}",
                crate::eng::eng(time, "s")
            );
            let what = plots::Plot {
                x: "time",
                window: (Some(time - 2.0 * period), Some(time + 3.0 * period)),
                title: &title,
            };
            plots::plot(h5, &what, &present, &path)?;
            written.push(path);
        }
    }
    Ok(written)
}

/// Where the tightest reset cycle starts and its number, from the run's figures.
fn worst_reset(summary: &Summary) -> Option<(f64, u64)> {
    let time = summary.get("reset_check.worst.time")?;
    let cycle = summary.get("reset_check.worst.cycle")?;
    Some((time, cycle as u64))
}
