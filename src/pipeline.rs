//! Runs one [`Job`]: builds the converter and its drive, streams waveforms and cycle
//! records to `waveforms.h5`, measures as it goes, then writes `summary.json` and the
//! plots. A failure part-way still closes the waveform file and writes the summary
//! with the error, so nothing already computed is lost.

use std::cell::RefCell;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

use anyhow::{Context, Result};
use stepflux_engine::{SimOptions, Sink, Topology};
use stepflux_models::controller::modulator::ClosedLoop;
use stepflux_models::cycles::{CycleRecord, CycleSink};
use stepflux_models::disturbance;
use stepflux_models::gate::OpenLoopGate;
use stepflux_models::measure::LossMeters;
use stepflux_models::run::ConverterRun;
use stepflux_models::template::Converter;
use stepflux_models::ModelError;

use crate::job::{Drive, Job, Start};
use crate::measurements::Plan;
use crate::report::{design_figures, verdicts, Figure, Interruption, Summary, CAUTION};
use crate::writers::atomic::write_json;
use crate::writers::{plots, waveforms::WaveformSink};

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

/// The converter under its drive.
enum Driver {
    Closed(Box<ClosedLoop>),
    Open {
        run: Box<ConverterRun>,
        gate: OpenLoopGate,
    },
}

impl Driver {
    /// The driver and the loss meters it carries (built on the converter as
    /// simulated, controller and load-step branches included).
    fn new(job: &Job) -> Result<(Self, LossMeters), ModelError> {
        let options = |period: f64| SimOptions {
            sample_interval: Some(job.analysis.sample_interval),
            ..SimOptions::for_period(period)
        };
        let mut losses = None;
        let mut driver = match &job.drive {
            Drive::Controller(spec) => {
                let options = options(spec.clock_period());
                let meters = |conv: &Converter| {
                    let l = LossMeters::new(conv)?;
                    let m = l.meters();
                    losses = Some(l);
                    Ok(m)
                };
                Driver::Closed(Box::new(ClosedLoop::with_meters(
                    &job.design,
                    spec,
                    &job.disturbances,
                    options,
                    meters,
                )?))
            }
            Drive::OpenLoop(gate) => {
                let conv = job.design.build()?;
                let (conv, actions) = disturbance::prepare(&conv, &job.disturbances, None)?;
                let l = LossMeters::new(&conv)?;
                let mut run = ConverterRun::with_meters(
                    &conv,
                    options(gate.period()),
                    Vec::new(),
                    l.meters(),
                )?;
                losses = Some(l);
                run.schedule(actions);
                Driver::Open {
                    run: Box::new(run),
                    gate: *gate,
                }
            }
        };
        if let Start::States(x) = &job.analysis.start {
            driver.run_mut().sim.set_states(x)?;
        }
        let losses =
            losses.ok_or_else(|| ModelError::Infeasible("loss meters were not built".into()))?;
        Ok((driver, losses))
    }

    fn run_mut(&mut self) -> &mut ConverterRun {
        match self {
            Driver::Closed(c) => &mut c.run,
            Driver::Open { run, .. } => run,
        }
    }

    fn run_ref(&self) -> &ConverterRun {
        match self {
            Driver::Closed(c) => &c.run,
            Driver::Open { run, .. } => run,
        }
    }

    fn advance_to(
        &mut self,
        t: f64,
        sink: &mut dyn Sink,
        cycles: &mut dyn CycleSink,
    ) -> Result<(), ModelError> {
        match self {
            Driver::Closed(c) => c.advance_to(t, sink, cycles),
            Driver::Open { run, gate } => {
                let done = (run.sim.time() / gate.period()).round();
                let target = (t / gate.period()).floor();
                let periods = (target - done).max(0.0) as usize;
                gate.run_periods(run, periods, sink, cycles)
            }
        }
    }

    fn finish(&mut self, cycles: &mut dyn CycleSink) {
        self.run_mut().finish(cycles);
    }
}

/// Samples and cycle records go both to the file and to the measurements. The run
/// hands samples and cycle records to two different sinks; both sides share the file
/// and the tracker through cells (calls never nest, so a borrow never overlaps).
struct Shared<'a> {
    /// None when the run writes no files ([`RunSettings::waveforms`] off).
    file: RefCell<Option<&'a mut WaveformSink>>,
    measure: RefCell<&'a mut Plan>,
}

struct Samples<'s, 'a>(&'s Shared<'a>);
struct Cycles<'s, 'a>(&'s Shared<'a>);

impl Sink for Samples<'_, '_> {
    fn sample(&mut self, time: f64, values: &[f64], at_event: bool) -> Result<(), String> {
        self.0.measure.borrow_mut().sample(time, values, at_event);
        match self.0.file.borrow_mut().as_mut() {
            Some(file) => file.sample(time, values, at_event),
            None => Ok(()),
        }
    }

    fn topology_change(
        &mut self,
        time: f64,
        before: Topology,
        after: Topology,
    ) -> Result<(), String> {
        match self.0.file.borrow_mut().as_mut() {
            Some(file) => file.topology_change(time, before, after),
            None => Ok(()),
        }
    }
}

impl CycleSink for Cycles<'_, '_> {
    fn cycle(&mut self, record: &CycleRecord) {
        self.0.measure.borrow_mut().cycle(record);
        if let Some(file) = self.0.file.borrow_mut().as_mut() {
            file.cycle(record);
        }
    }
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

/// How the simulation loop ended without an error.
enum Ended {
    /// At the stop time.
    Finished,
    /// At a stop request, at this simulated time.
    Interrupted(f64),
}

/// Runs a job into `out_root/<job name>/`, calling `progress` with the fraction done.
pub fn run_job(job: &Job, out_root: &Path, progress: &(dyn Fn(f64) + Sync)) -> Result<RunOutput> {
    let settings = RunSettings {
        waveforms: true,
        stop: Some(crate::interrupt::flag()),
    };
    run_job_with(job, out_root, progress, settings)
}

/// [`run_job`] with explicit [`RunSettings`].
pub fn run_job_with(
    job: &Job,
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
    let (mut driver, losses) = Driver::new(job)
        .map_err(|e| anyhow::anyhow!(e))
        .context("building the converter")?;
    let probes: Vec<(String, &str)> = driver
        .run_ref()
        .probes()
        .iter()
        .map(|p| (p.name.clone(), p.unit))
        .collect();
    let save = saved_indices(job, &probes);
    let h5_path = dir.join("waveforms.h5");
    let switchable = switchable_names(driver.run_ref());
    let mut file = match settings.waveforms {
        true => Some(WaveformSink::create(
            &h5_path,
            &probes,
            &save,
            &switchable,
            &job.source_text,
        )?),
        false => None,
    };
    let mut plan =
        Plan::new(job, driver.run_ref().probes(), Some(losses)).map_err(|e| anyhow::anyhow!(e))?;
    let outcome = {
        let shared = Shared {
            file: RefCell::new(file.as_mut()),
            measure: RefCell::new(&mut plan),
        };
        simulate(job, &mut driver, &shared, progress, settings.stop)
    };
    let samples = file.as_ref().map_or(0, |f| f.samples());
    let file_result = file.map_or(Ok(()), |f| f.finish());
    let simulated = driver.run_ref().sim.time();
    let measurements: Vec<Figure> = plan.figures().into_iter().map(Figure::from).collect();
    let verdicts = verdicts(job, &measurements);
    let interrupted = match outcome {
        Ok(Ended::Interrupted(at)) => Some(Interruption::at(at)),
        _ => None,
    };
    let finished = outcome.is_ok() && file_result.is_ok() && interrupted.is_none();
    let mut summary = Summary {
        scenario: job.name.clone(),
        tool: format!("stepflux {}", env!("CARGO_PKG_VERSION")),
        run_time_s: started.elapsed().as_secs_f64(),
        simulated_time_s: simulated,
        samples,
        design: design_figures(job),
        passed: finished && plan.reset_passed() && verdicts.iter().all(|v| v.pass),
        measurements,
        verdicts,
        error: None,
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
        Ended::Finished => write_plots(&h5_path, &dir, &probes, &save)?,
        // A run stopped early may hold too little to plot; the summary and the
        // waveform file are what matter then.
        Ended::Interrupted(_) => write_plots(&h5_path, &dir, &probes, &save).unwrap_or_default(),
    };
    Ok(RunOutput {
        dir,
        summary,
        plots,
    })
}

fn simulate(
    job: &Job,
    driver: &mut Driver,
    shared: &Shared<'_>,
    progress: &(dyn Fn(f64) + Sync),
    stop_flag: Option<&AtomicBool>,
) -> Result<Ended> {
    let stop = job.analysis.stop_time;
    let window = shared.measure.borrow().window;
    let (mut samples, mut cycles) = (Samples(shared), Cycles(shared));
    let periods = stop * crate::scenario::design_point(job).frequency;
    let slices = (periods / PERIODS_PER_SLICE)
        .ceil()
        .clamp(MIN_SLICES, MAX_SLICES) as usize;
    // Slice ends: evenly spaced for progress, plus the steady window's ends where the
    // energy meters are read.
    let mut ends: Vec<(f64, Option<bool>)> = (1..=slices)
        .map(|k| (stop * k as f64 / slices as f64, None))
        .collect();
    ends.push((window.0, Some(false)));
    ends.push((window.1, Some(true)));
    ends.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut flushed = Instant::now();
    for (t, snapshot) in ends {
        if t > stop {
            continue;
        }
        if stop_flag.is_some_and(|f| f.load(Ordering::Relaxed)) {
            driver.finish(&mut cycles);
            return Ok(Ended::Interrupted(driver.run_ref().sim.time()));
        }
        if flushed.elapsed().as_secs_f64() >= FLUSH_EVERY_S {
            if let Some(file) = shared.file.borrow_mut().as_mut() {
                file.checkpoint()?;
            }
            flushed = Instant::now();
        }
        driver
            .advance_to(t, &mut samples, &mut cycles)
            .map_err(|e| anyhow::anyhow!(e))
            .with_context(|| format!("simulating '{}'", job.name))?;
        if let Some(end) = snapshot {
            shared
                .measure
                .borrow_mut()
                .snapshot(&driver.run_ref().sim, end)
                .map_err(|e| anyhow::anyhow!(e))?;
        }
        progress(t / stop);
    }
    driver.finish(&mut cycles);
    Ok(Ended::Finished)
}

fn switchable_names(run: &ConverterRun) -> Vec<String> {
    let system = run.sim.system();
    system
        .layout()
        .switchable
        .iter()
        .map(|&e| system.circuit().element(e).name.clone())
        .collect()
}

fn saved_indices(job: &Job, probes: &[(String, &str)]) -> Vec<usize> {
    if job.save.is_empty() {
        return (0..probes.len()).collect();
    }
    probes
        .iter()
        .enumerate()
        .filter(|(_, (n, _))| job.save.iter().any(|s| s == n))
        .map(|(k, _)| k)
        .collect()
}

/// The standard plots, for whichever of their signals were saved.
fn write_plots(
    h5: &Path,
    dir: &Path,
    probes: &[(String, &str)],
    save: &[usize],
) -> Result<Vec<PathBuf>> {
    let saved = |name: &str| save.iter().any(|&k| probes[k].0 == name);
    let sets: [(&str, &str, &str, Vec<&str>); 3] = [
        (
            "output.svg",
            "time",
            "Output voltage and inductor current",
            vec!["out.v", "lout.i"],
        ),
        (
            "primary.svg",
            "time",
            "Drain voltage, magnetising current and flux density",
            vec!["drain.v", "mag.i", "core.b"],
        ),
        (
            "duty.svg",
            "cycles/start",
            "Duty per cycle",
            vec!["cycles/duty"],
        ),
    ];
    let mut written = Vec::new();
    for (file, x, title, signals) in sets {
        let present: Vec<&str> = signals
            .into_iter()
            .filter(|s| s.starts_with("cycles/") || saved(s))
            .collect();
        if present.is_empty() {
            continue;
        }
        let path = dir.join("plots").join(file);
        plots::plot(h5, x, &present, title, &path)?;
        written.push(path);
    }
    Ok(written)
}
