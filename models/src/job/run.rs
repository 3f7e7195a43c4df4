//! A job's run: the converter built once under its drive (open or closed loop alike),
//! started as the job asks, stepped slice by slice through one fan-out that feeds the
//! measurements the trace of the exact solution and a recorder (the binary's waveform
//! file) the output samples and cycle records, and ended with typed results.
//!
//! Slicing is the caller's: it decides when to report progress, honour a stop request
//! or flush a file, none of which this crate knows of.

use std::cell::RefCell;

use stepflux_engine::{SimOptions, Sink, Topology, TracePoint};

use super::build::Built;
use super::plan::Plan;
use super::verdict::{verdicts, Verdict};
use super::{Drive, Job, Start};
use crate::controller::modulator::ClosedLoop;
use crate::cycles::{CycleRecord, CycleSink};
use crate::gate::OpenLoopGate;
use crate::measure::{Figure, LossMeters};
use crate::run::ConverterRun;
use crate::runaway::{Runaway, RunawayGuard};
use crate::steady::names::{overlay, place, state_names};
use crate::steady::SteadyState;
use crate::template::{Converter, Probe};
use crate::ModelError;

/// Where output samples and cycle records go besides the measurements.
pub trait Recorder: Sink + CycleSink {}
impl<T: Sink + CycleSink> Recorder for T {}

/// How a stretch of the run ended without an error.
#[derive(Clone, Debug, PartialEq)]
pub enum Reached {
    /// The slice's end.
    End,
    /// The magnetising current ran away past the saturation knee: the design failed
    /// and the run is over.
    Runaway(Runaway),
}

/// One stretch of the run: up to `until` seconds, reading the energy meters there when
/// `meter` says so (false: the steady window's start, true: its end).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Slice {
    /// End of the stretch, seconds.
    pub until: f64,
    /// Read the energy meters at the end: `Some(false)` window start, `Some(true)` end.
    pub meter: Option<bool>,
}

/// What a run found.
pub struct Results {
    /// Every measured figure.
    pub figures: Vec<Figure>,
    /// The job's limits judged on them.
    pub verdicts: Vec<Verdict>,
    /// Whether the core-reset check passed every cycle.
    pub reset_passed: bool,
    /// Simulated time reached, seconds.
    pub simulated: f64,
}

/// The converter under its drive.
enum Driver {
    Closed(Box<ClosedLoop>),
    Open {
        run: Box<ConverterRun>,
        gate: OpenLoopGate,
    },
}

/// A job being run.
pub struct JobRun {
    driver: Driver,
    plan: Plan,
    guard: RunawayGuard,
    stop: f64,
    cycles: usize,
}

impl JobRun {
    /// Builds `job`'s converter once, with its drive, loss meters and measurements, and
    /// sets its initial state (`steady`: the periodic steady state the caller found for
    /// `analysis.start: "steady"`).
    pub fn new(job: &Job, steady: Option<&SteadyState>) -> Result<Self, ModelError> {
        let built = Built::for_job(job)?;
        Self::from_built(job, built, steady)
    }

    /// As [`JobRun::new`], on the converter `check` already built for `job`.
    pub fn from_built(
        job: &Job,
        built: Built,
        steady: Option<&SteadyState>,
    ) -> Result<Self, ModelError> {
        let (mut driver, losses) = Driver::new(job, built)?;
        driver.start(job, steady)?;
        let mut plan = Plan::new(job, driver.run_ref().probes(), Some(losses))?;
        plan.watch_main_switch(driver.run_ref());
        // The energy figures come from the meters at the steady window's two ends, so
        // the steps before it are left out of them (summing them would cost a fifth
        // of a start-up case for a difference that cancels).
        if plan.window.0 > driver.run_ref().sim.time() {
            driver.run_mut().sim.set_metering(false);
        }
        let traced = plan.traced_probes(driver.run_ref().probes());
        driver.run_mut().trace_also(&traced)?;
        Ok(JobRun {
            driver,
            plan,
            guard: RunawayGuard::new(&job.design.transformer),
            stop: job.analysis.stop_time,
            cycles: 0,
        })
    }

    /// The converter's probes, in sample order.
    pub fn probes(&self) -> &[Probe] {
        self.driver.run_ref().probes()
    }

    /// Names of the elements whose on/off state makes the topology, in bit order.
    pub fn switchable_names(&self) -> Vec<String> {
        let system = self.driver.run_ref().sim.system();
        system
            .layout()
            .switchable
            .iter()
            .map(|&e| system.circuit().element(e).name.clone())
            .collect()
    }

    /// Simulated time reached, seconds.
    pub fn time(&self) -> f64 {
        self.driver.run_ref().sim.time()
    }

    /// The stretches a run of `slices` even parts goes through, with the steady
    /// window's ends where the energy meters are read. The last ends at the stop time
    /// itself: stop·k/slices can round one ulp above it.
    pub fn slices(&self, slices: usize) -> Vec<Slice> {
        let stop = self.stop;
        let window = self.plan.window;
        let mut ends: Vec<Slice> = (1..slices)
            .map(|k| Slice {
                until: (stop * k as f64 / slices as f64).min(stop),
                meter: None,
            })
            .collect();
        ends.push(Slice {
            until: stop,
            meter: None,
        });
        for (until, end) in [(window.0, false), (window.1, true)] {
            ends.push(Slice {
                until,
                meter: Some(end),
            });
        }
        ends.retain(|s| s.until <= stop);
        ends.sort_by(|a, b| a.until.total_cmp(&b.until));
        ends
    }

    /// Runs one stretch, feeding `recorder` (if any) and the measurements.
    pub fn advance(
        &mut self,
        slice: Slice,
        recorder: Option<&mut dyn Recorder>,
    ) -> Result<Reached, ModelError> {
        let fan = Fan {
            recorder: RefCell::new(recorder),
            plan: RefCell::new(&mut self.plan),
        };
        let mut samples = Samples(&fan);
        let mut cycles = Cycles(&fan, self.cycles);
        let reached = match slice.until < self.stop {
            true => self
                .driver
                .advance_to(slice.until, &mut samples, &mut cycles, &self.guard),
            false => self
                .driver
                .advance_to_end(self.stop, &mut samples, &mut cycles, &self.guard),
        };
        self.cycles = cycles.1;
        match reached {
            Ok(()) => {}
            Err(ModelError::Runaway(r)) => return Ok(Reached::Runaway(r)),
            Err(e) => return Err(e),
        }
        if let Some(end) = slice.meter {
            if !end {
                self.driver.run_mut().sim.set_metering(true);
            }
            self.plan.snapshot(&self.driver.run_ref().sim, end)?;
        }
        Ok(Reached::End)
    }

    /// Closes the cycle under way (a run ends, is stopped or ran away) and hands its
    /// record on.
    pub fn finish(&mut self, recorder: Option<&mut dyn Recorder>) {
        let fan = Fan {
            recorder: RefCell::new(recorder),
            plan: RefCell::new(&mut self.plan),
        };
        let mut cycles = Cycles(&fan, self.cycles);
        self.driver.run_mut().finish(&mut cycles);
        self.cycles = cycles.1;
    }

    /// The figures and verdicts of the run so far.
    pub fn results(&mut self, job: &Job) -> Results {
        let simulated = self.time();
        self.plan.end_of_run(simulated);
        let figures = self.plan.figures();
        Results {
            verdicts: verdicts(&job.limits, &figures),
            figures,
            reset_passed: self.plan.reset_passed(),
            simulated,
        }
    }
}

impl Driver {
    /// The driver and the loss meters it carries (built on the converter as
    /// simulated, controller and load-step branches included).
    fn new(job: &Job, built: Built) -> Result<(Self, LossMeters), ModelError> {
        let options = |period: f64| SimOptions {
            sample_interval: Some(job.analysis.sample_interval),
            ..SimOptions::for_period(period)
        };
        let mut losses = None;
        let Built {
            converter,
            actions,
            parts,
        } = built;
        let driver = match (&job.simulated_drive(), parts) {
            (Drive::Controller(spec), Some(parts)) => {
                let options = options(spec.clock_period());
                let meters = |conv: &Converter| {
                    let l = LossMeters::new(conv)?;
                    let m = l.meters();
                    losses = Some(l);
                    Ok(m)
                };
                let cl = ClosedLoop::assemble(converter, parts, actions, spec, options, meters)?;
                Driver::Closed(Box::new(cl))
            }
            (Drive::OpenLoop(gate), _) => {
                let l = LossMeters::new(&converter)?;
                let mut run = ConverterRun::with_meters(
                    &converter,
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
            (Drive::Controller(_), None) => {
                return Err(ModelError::Infeasible(
                    "the converter was built without its controller".into(),
                ))
            }
        };
        let losses =
            losses.ok_or_else(|| ModelError::Infeasible("loss meters were not built".into()))?;
        Ok((driver, losses))
    }

    /// Sets the initial states the job asks for.
    fn start(&mut self, job: &Job, steady: Option<&SteadyState>) -> Result<(), ModelError> {
        let sim = &mut self.run_mut().sim;
        let names = state_names(sim.system());
        let mut x = sim.state().as_slice()[..names.len()].to_vec();
        match &job.analysis.start {
            Start::Zero => return Ok(()),
            Start::States(given) => x.clone_from(given),
            Start::Named(values) => {
                let values: Vec<(String, f64)> =
                    values.iter().map(|v| (v.name.clone(), v.value)).collect();
                place(&names, &values, &mut x)
                    .map_err(|e| ModelError::Infeasible(format!("analysis.start.values: {e}")))?;
            }
            Start::Steady => {
                let s = steady.ok_or_else(|| {
                    ModelError::Infeasible("analysis.start: the steady state was not found".into())
                })?;
                overlay(
                    &names,
                    s.named().iter().map(|(n, v)| (n.as_str(), *v)),
                    &mut x,
                );
            }
        }
        sim.set_states(&x)?;
        Ok(())
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
        cycles: &mut Cycles<'_, '_, '_>,
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
            guard.check(self.run_ref(), cycles.1)?;
        }
        Ok(())
    }

    /// Runs on to `stop` exactly, through the clock period it cuts.
    fn advance_to_end(
        &mut self,
        stop: f64,
        sink: &mut dyn Sink,
        cycles: &mut Cycles<'_, '_, '_>,
        guard: &RunawayGuard,
    ) -> Result<(), ModelError> {
        self.advance_to(stop, sink, cycles, guard)?;
        match self {
            Driver::Closed(c) => c.advance_to_end(stop, sink, cycles)?,
            Driver::Open { run, gate } => gate.run_until(run, stop, sink, cycles)?,
        }
        guard.check(self.run_ref(), cycles.1)?;
        Ok(())
    }
}

/// The one fan-out: the run hands samples and cycle records to two different sinks,
/// and both sides share the recorder and the measurements through cells (the run's
/// calls never nest, so a borrow never overlaps). Output samples go to the recorder
/// only; the measurements are fed the trace of the exact solution, so no figure
/// depends on the sample interval or on what is recorded.
struct Fan<'a, 'r> {
    recorder: RefCell<Option<&'r mut dyn Recorder>>,
    plan: RefCell<&'a mut Plan>,
}

struct Samples<'f, 'a, 'r>(&'f Fan<'a, 'r>);
/// Cycle records to both sides, counted: the count is the index of the cycle under way.
struct Cycles<'f, 'a, 'r>(&'f Fan<'a, 'r>, usize);

impl Sink for Samples<'_, '_, '_> {
    fn sample(&mut self, time: f64, values: &[f64], at_event: bool) -> Result<(), String> {
        match self.0.recorder.borrow_mut().as_mut() {
            Some(r) => r.sample(time, values, at_event),
            None => Ok(()),
        }
    }

    fn topology_change(
        &mut self,
        time: f64,
        before: Topology,
        after: Topology,
    ) -> Result<(), String> {
        match self.0.recorder.borrow_mut().as_mut() {
            Some(r) => r.topology_change(time, before, after),
            None => Ok(()),
        }
    }

    fn listens(&self) -> bool {
        self.0
            .recorder
            .borrow()
            .as_ref()
            .is_some_and(|r| r.listens())
    }

    fn trace(&mut self, point: &TracePoint<'_>) -> Result<(), String> {
        self.0.plan.borrow_mut().trace(point);
        Ok(())
    }

    fn traces(&self) -> bool {
        true
    }
}

impl CycleSink for Cycles<'_, '_, '_> {
    fn cycle(&mut self, record: &CycleRecord) {
        self.1 += 1;
        self.0.plan.borrow_mut().cycle(record);
        if let Some(r) = self.0.recorder.borrow_mut().as_mut() {
            r.cycle(record);
        }
    }
}
