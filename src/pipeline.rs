//! Runs one [`Job`]: builds the converter and its drive, streams waveforms and cycle
//! records to `waveforms.h5`, measures as it goes, then writes `summary.json` and the
//! plots. A failure part-way still closes the waveform file and writes the summary
//! with the error, so nothing already computed is lost.

use std::cell::RefCell;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

use anyhow::{Context, Result};
use stepflux_engine::{SimOptions, Sink, Topology, TracePoint};
use stepflux_models::controller::modulator::ClosedLoop;
use stepflux_models::cycles::{CycleRecord, CycleSink};
use stepflux_models::disturbance;
use stepflux_models::gate::OpenLoopGate;
use stepflux_models::measure::LossMeters;
use stepflux_models::run::ConverterRun;
use stepflux_models::runaway::{Runaway, RunawayGuard};
use stepflux_models::steady::map::settled_spec;
use stepflux_models::steady::names::{place, state_names};
use stepflux_models::steady::SteadyState;
use stepflux_models::template::Converter;
use stepflux_models::ModelError;

use crate::job::{Drive, Job, Start};
use crate::measurements::Plan;
use crate::report::{design_figures, verdicts, Figure, Interruption, Summary, CAUTION};
use crate::steady::SteadyReport;
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
    fn new(job: &Job) -> Result<(Self, LossMeters, Option<SteadyState>), ModelError> {
        let options = |period: f64| SimOptions {
            sample_interval: Some(job.analysis.sample_interval),
            ..SimOptions::for_period(period)
        };
        let mut losses = None;
        let mut driver = match &job.drive {
            Drive::Controller(spec) => {
                let options = options(spec.clock_period());
                // Started in steady state, the controller has been running for ever:
                // its soft starts are over.
                let spec = &match job.analysis.start {
                    Start::Steady => settled_spec(spec),
                    _ => spec.clone(),
                };
                let meters = |conv: &Converter| {
                    let l = LossMeters::new(conv)?;
                    let m = l.meters();
                    losses = Some(l);
                    Ok(m)
                };
                let cl =
                    ClosedLoop::with_meters(&job.design, spec, &job.disturbances, options, meters)?;
                Driver::Closed(Box::new(cl))
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
        let steady = driver.start(job)?;
        let losses =
            losses.ok_or_else(|| ModelError::Infeasible("loss meters were not built".into()))?;
        Ok((driver, losses, steady))
    }

    /// Sets the initial states the job asks for; returns the steady state if it was
    /// searched for.
    fn start(&mut self, job: &Job) -> Result<Option<SteadyState>, ModelError> {
        let sim = &mut self.run_mut().sim;
        let names = state_names(sim.system());
        let mut x = sim.state().as_slice()[..names.len()].to_vec();
        let steady = match &job.analysis.start {
            Start::Zero => return Ok(None),
            Start::States(given) => {
                x.clone_from(given);
                None
            }
            Start::Named(values) => {
                let values: Vec<(String, f64)> =
                    values.iter().map(|v| (v.name.clone(), v.value)).collect();
                place(&names, &values, &mut x)
                    .map_err(|e| ModelError::Infeasible(format!("analysis.start.values: {e}")))?;
                None
            }
            Start::Steady => {
                let s = crate::steady::find_for_run(job)?;
                crate::steady::apply(&s, &names, &mut x);
                Some(s)
            }
        };
        sim.set_states(&x)?;
        Ok(steady)
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

    /// Clock period of the drive, seconds.
    fn clock_period(&self) -> f64 {
        match self {
            Driver::Closed(c) => c.spec.clock_period(),
            Driver::Open { gate, .. } => gate.period(),
        }
    }

    /// Runs whole clock periods up to `t`, one at a time so the guard sees each.
    fn advance_to(
        &mut self,
        t: f64,
        sink: &mut dyn Sink,
        cycles: &mut Cycles<'_, '_>,
        guard: &RunawayGuard,
    ) -> Result<(), ModelError> {
        let period = self.clock_period();
        let mut done = (self.run_ref().sim.time() / period).round();
        while (done + 1.0) * period <= t * (1.0 + 1e-12) {
            done += 1.0;
            match self {
                Driver::Closed(c) => c.advance_to(done * period, sink, cycles)?,
                Driver::Open { run, gate } => gate.run_periods(run, 1, sink, cycles)?,
            }
            guard.check(self.run_ref(), cycles.count())?;
        }
        Ok(())
    }

    /// Runs on to `stop` exactly, through the clock period it cuts.
    fn advance_to_end(
        &mut self,
        stop: f64,
        sink: &mut dyn Sink,
        cycles: &mut Cycles<'_, '_>,
        guard: &RunawayGuard,
    ) -> Result<(), ModelError> {
        self.advance_to(stop, sink, cycles, guard)?;
        match self {
            Driver::Closed(c) => c.advance_to_end(stop, sink, cycles)?,
            Driver::Open { run, gate } => gate.run_until(run, stop, sink, cycles)?,
        }
        guard.check(self.run_ref(), cycles.count())?;
        Ok(())
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

/// Output samples go to the file; the measurements are fed the trace of the exact
/// solution, so no figure depends on the sample interval or on what is written.
struct Samples<'s, 'a> {
    shared: &'s Shared<'a>,
}
/// Cycle records to both sides, counted.
struct Cycles<'s, 'a>(&'s Shared<'a>, usize);

impl Cycles<'_, '_> {
    /// Records closed so far: the index of the cycle under way.
    fn count(&self) -> usize {
        self.1
    }
}

impl Sink for Samples<'_, '_> {
    fn sample(&mut self, time: f64, values: &[f64], at_event: bool) -> Result<(), String> {
        match self.shared.file.borrow_mut().as_mut() {
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
        match self.shared.file.borrow_mut().as_mut() {
            Some(file) => file.topology_change(time, before, after),
            None => Ok(()),
        }
    }

    fn listens(&self) -> bool {
        self.shared.file.borrow().is_some()
    }

    fn trace(&mut self, point: &TracePoint<'_>) -> Result<(), String> {
        self.shared.measure.borrow_mut().trace(point);
        Ok(())
    }

    fn traces(&self) -> bool {
        true
    }
}

impl CycleSink for Cycles<'_, '_> {
    fn cycle(&mut self, record: &CycleRecord) {
        self.1 += 1;
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
    /// Where the magnetising current ran away past the saturation knee.
    Runaway(Runaway),
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
    let (mut driver, losses, steady) = Driver::new(job)
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
    let traced = plan.traced_probes(driver.run_ref().probes());
    driver
        .run_mut()
        .trace_also(&traced)
        .map_err(|e| anyhow::anyhow!(e))?;
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
    plan.end_of_run(simulated);
    let mut measurements: Vec<Figure> = plan.figures().into_iter().map(Figure::from).collect();
    if job.limits.on_loop_gain() {
        measurements.extend(crate::loop_cmd::loop_figures(job));
    }
    let verdicts = verdicts(job, &measurements);
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
        simulated_time_s: simulated,
        samples,
        design: design_figures(job),
        passed: finished && plan.reset_passed() && verdicts.iter().all(|v| v.pass),
        measurements,
        verdicts,
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
        Ended::Finished => write_plots(&h5_path, &dir, &probes, &save, job)?,
        // A run stopped early may hold too little to plot; the summary and the
        // waveform file are what matter then.
        Ended::Interrupted(_) | Ended::Runaway(_) => {
            write_plots(&h5_path, &dir, &probes, &save, job).unwrap_or_default()
        }
    };
    html::write_run_report(&dir, &summary, &plots, &job.source_text)?;
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
    let mut samples = Samples { shared };
    let mut cycles = Cycles(shared, 0);
    let guard = RunawayGuard::new(&job.design.transformer);
    let periods = stop * crate::scenario::design_point(job).frequency;
    let slices = (periods / PERIODS_PER_SLICE)
        .ceil()
        .clamp(MIN_SLICES, MAX_SLICES) as usize;
    // Slice ends: evenly spaced for progress and stop requests, plus the steady
    // window's ends where the energy meters are read. The last slice ends at `stop`
    // itself: stop·k/slices can round one ulp above stop, and a slice past the stop
    // time used to be dropped, ending the run at the last whole period before the
    // one-but-last slice end (6.960 ms of 7 ms).
    let mut ends: Vec<(f64, Option<bool>)> = (1..slices)
        .map(|k| ((stop * k as f64 / slices as f64).min(stop), None))
        .collect();
    ends.push((stop, None));
    ends.push((window.0, Some(false)));
    ends.push((window.1, Some(true)));
    ends.retain(|(t, _)| *t <= stop);
    ends.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut flushed = Instant::now();
    for (t, snapshot) in ends {
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
        let reached = if t < stop {
            driver.advance_to(t, &mut samples, &mut cycles, &guard)
        } else {
            driver.advance_to_end(stop, &mut samples, &mut cycles, &guard)
        };
        match reached {
            Ok(()) => {}
            Err(ModelError::Runaway(r)) => {
                driver.finish(&mut cycles);
                return Ok(Ended::Runaway(r));
            }
            Err(e) => {
                return Err(anyhow::anyhow!(e))
                    .with_context(|| format!("simulating '{}'", job.name));
            }
        }
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

/// The standard plots, for whichever of their signals were saved, with the limits the
/// design knows drawn on their panels (switch rating, Bsat, the reset duty limit).
fn write_plots(
    h5: &Path,
    dir: &Path,
    probes: &[(String, &str)],
    save: &[usize],
    job: &Job,
) -> Result<Vec<PathBuf>> {
    let saved = |name: &str| save.iter().any(|&k| probes[k].0 == name);
    let d = &job.design;
    let marker = |value: f64, label: &str| plots::Marker {
        value,
        label: label.into(),
    };
    let reset_limit =
        stepflux_models::figures::DesignFigures::compute(d, &crate::scenario::design_point(job))
            .reset_limit_duty;
    let panel = |signal: &str, markers: Vec<plots::Marker>| plots::Panel {
        signal: signal.into(),
        markers,
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
            ],
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
    Ok(written)
}
