//! Which measurements a job gets, and when: the plan that turns a scenario's drive and
//! disturbances into windows for the streaming measurements of `models::measure`.
//!
//! - start-up: from 0 to the first disturbance (closed loop only: it needs a set point);
//! - one step response per load, line or reference step, until the next disturbance
//!   or the end, each against the set point in force after it (a reference step moves
//!   it: see [`StepResponse::set_point_change`]);
//! - ripple of `out.v` and `lout.i`, and the exact energy balance (efficiency, loss
//!   breakdown), over a steady window: the last [`STEADY_PERIODS`] periods before the
//!   first disturbance, or before the end;
//! - the core-reset check over every cycle of the run.

use crate::cycles::CycleRecord;
use crate::disturbance::Disturbance;
use crate::measure::{
    CossTurnOn, EnergySnapshot, Figure, LossMeters, LossReport, Measurement, PartLosses,
    ResetCheck, ResetLimits, Ripple, StartUp, StepResponse, StepSettings,
};
use crate::run::ConverterRun;
use crate::template::Probe;
use crate::ModelError;
use stepflux_engine::{Simulation, TracePoint, Turning};

use super::{Drive, Job};

/// Probes whose ripple is measured over the steady window.
const RIPPLE_PROBES: [&str; 2] = ["out.v", "lout.i"];
/// Length of the steady window, switching periods.
const STEADY_PERIODS: f64 = 20.0;
/// Dips allowed below the running maximum before 90 % in a monotonic start-up, as a
/// fraction of the set point (about the ripple of a typical output).
const DIP_ALLOWANCE: f64 = 0.01;
/// Default recovery band, fraction of the set point (common practice: ±1 %).
const DEFAULT_BAND: f64 = 0.01;

/// The measurements of one run.
pub struct Plan {
    startup: Option<StartUp>,
    steps: Vec<StepResponse>,
    ripple: Vec<Ripple>,
    reset: ResetCheck,
    coss: CossTurnOn,
    parts: PartLosses,
    /// Steady window, seconds.
    pub window: (f64, f64),
    losses: Option<LossMeters>,
    snapshots: (Option<EnergySnapshot>, Option<EnergySnapshot>),
    bias: f64,
}

/// Switching period of the job's drive, seconds.
pub fn period(job: &Job) -> f64 {
    match &job.drive {
        Drive::Controller(c) => match c.mode {
            crate::controller::OutputMode::SingleEnded => c.clock_period(),
            crate::controller::OutputMode::Alternating => 2.0 * c.clock_period(),
        },
        Drive::OpenLoop(g) => g.period(),
    }
}

/// One step response per disturbance before the stop time, each against the set point
/// in force after it: a reference step to `to` volts scales the set point by
/// `to`/reference (the divider, or the isolated feedback's gain, is unchanged).
fn step_responses(
    job: &Job,
    c: &crate::controller::ControllerSpec,
    probes: &[Probe],
    times: &[f64],
    band: f64,
) -> Result<Vec<StepResponse>, ModelError> {
    let stop = job.analysis.stop_time;
    let mut order: Vec<(usize, &Disturbance)> = job.disturbances.iter().enumerate().collect();
    order.sort_by(|a, b| a.1.time().total_cmp(&b.1.time()));
    let mut sp = c.voltage_loop.set_point();
    let mut steps = Vec::new();
    for (k, d) in order {
        let at = d.time();
        if at >= stop {
            continue;
        }
        let until = times.iter().copied().find(|&t| t > at).unwrap_or(stop);
        let mut settings = StepSettings {
            label: String::new(),
            step_time: at,
            set_point: sp,
            band,
            duty_window: (0.25 * (until - at)).min(STEADY_PERIODS * period(job)),
            settle_from: until - 0.2 * (until - at),
            until,
        };
        steps.push(match d {
            Disturbance::LoadCurrent { .. } | Disturbance::LoadResistance { .. } => {
                settings.label = format!("load_step{k}");
                StepResponse::new(probes, settings)?
            }
            Disturbance::Line { .. } => {
                settings.label = format!("line_step{k}");
                StepResponse::new(probes, settings)?
            }
            Disturbance::Reference { to, .. } => {
                let from = sp;
                sp = c.voltage_loop.set_point() * to / c.voltage_loop.reference;
                settings.label = format!("reference_step{k}");
                settings.set_point = sp;
                StepResponse::set_point_change(probes, settings, from)?
            }
        });
    }
    Ok(steps)
}

fn set_point(job: &Job) -> Option<f64> {
    match &job.drive {
        Drive::Controller(c) => Some(c.voltage_loop.set_point()),
        Drive::OpenLoop(_) => None,
    }
}

impl Plan {
    /// The plan for `job`, whose run has `probes`; `losses` are the meters given to it.
    pub fn new(
        job: &Job,
        probes: &[Probe],
        losses: Option<LossMeters>,
    ) -> Result<Self, ModelError> {
        let stop = job.analysis.stop_time;
        let mut times: Vec<f64> = job
            .disturbances
            .iter()
            .map(Disturbance::time)
            .filter(|&t| t < stop)
            .collect();
        times.sort_by(f64::total_cmp);
        let first = times.first().copied().unwrap_or(stop);
        let window = (
            (first - STEADY_PERIODS * period(job)).max(0.5 * first),
            first,
        );
        let band = job
            .limits
            .recovery_band_percent
            .map_or(DEFAULT_BAND, |p| p / 100.0);
        let startup = match set_point(job) {
            Some(sp) => Some(StartUp::new(probes, sp, DIP_ALLOWANCE * sp, 0.0, first)?),
            None => None,
        };
        let steps = match &job.drive {
            Drive::Controller(c) => step_responses(job, c, probes, &times, band)?,
            Drive::OpenLoop(_) => Vec::new(),
        };
        // Samples at the first disturbance's own instant show the state after its
        // actions (a new load's current through the ESR): the ripple window stops a
        // millionth of a period short of it.
        let sample_end = match first < stop {
            true => window.1 - 1e-6 * period(job),
            false => window.1,
        };
        let ripple = RIPPLE_PROBES
            .iter()
            .map(|p| Ripple::new(probes, p, window.0, sample_end))
            .collect::<Result<_, _>>()?;
        let coss = CossTurnOn::new(
            losses.as_ref().map_or(0.0, LossMeters::main_switch_coss),
            window.0,
            sample_end,
        );
        let parts = PartLosses::new(&job.design, probes, window.0, sample_end)?;
        Ok(Plan {
            startup,
            steps,
            ripple,
            reset: ResetCheck::new(&job.design, probes, ResetLimits::for_design(&job.design))?,
            coss,
            parts,
            window,
            losses,
            snapshots: (None, None),
            bias: job.bias_power,
        })
    }

    /// Reads the energy meters at the steady window's start (`end` false) or end.
    pub fn snapshot(&mut self, sim: &Simulation, end: bool) -> Result<(), ModelError> {
        if let Some(l) = &self.losses {
            let s = Some(l.snapshot(sim)?);
            if end {
                self.snapshots.1 = s;
            } else {
                self.snapshots.0 = s;
            }
        }
        Ok(())
    }

    /// Lets the modelled part losses see the main switch of `run` (its topology bit).
    pub fn watch_main_switch(&mut self, run: &ConverterRun) {
        let layout = run.sim.system().layout();
        let bit = run
            .key
            .main_switches
            .first()
            .and_then(|e| layout.bit_of[e.index()]);
        self.parts.watch_switch(bit);
    }

    /// Calls `f` on every measurement in turn (a trace point reaches each; no list is
    /// gathered, so feeding a point allocates nothing).
    fn each_part(&mut self, mut f: impl FnMut(&mut dyn Measurement)) {
        if let Some(s) = self.startup.as_mut() {
            f(s);
        }
        for s in &mut self.steps {
            f(s);
        }
        for r in &mut self.ripple {
            f(r);
        }
        f(&mut self.reset);
        f(&mut self.coss);
    }

    /// One point of the exact solution; measurements are fed these, never output
    /// samples, so no figure depends on the sample interval.
    pub fn trace(&mut self, point: &TracePoint<'_>) {
        self.each_part(|m| m.trace(point));
        if self.parts.any() {
            self.parts.trace(point);
        }
    }

    /// Probes whose extrema the measurements read, for the run to trace.
    pub fn traced_probes(&self, probes: &[Probe]) -> Vec<(usize, Turning)> {
        let mut out: Vec<(usize, Turning)> = (self.reset.probes().into_iter())
            .chain(self.startup.iter().map(StartUp::column))
            .chain(self.steps.iter().map(StepResponse::column))
            .chain(
                RIPPLE_PROBES
                    .iter()
                    .filter_map(|n| probes.iter().position(|p| p.name == *n)),
            )
            .map(|k| (k, Turning::Both))
            .collect();
        if self.parts.any() {
            for k in self.parts.probes() {
                if !out.iter().any(|(p, _)| *p == k) {
                    out.push((k, Turning::Maxima));
                }
            }
        }
        out
    }

    /// One cycle record.
    pub fn cycle(&mut self, record: &CycleRecord) {
        self.each_part(|m| m.cycle(record));
        self.parts.cycle(record);
    }

    /// The run ended at `time` seconds (its last cycle may be cut short there).
    pub fn end_of_run(&mut self, time: f64) {
        self.reset.end_of_run(time);
    }

    /// Whether the core-reset check passed every cycle.
    pub fn reset_passed(&self) -> bool {
        self.reset.verdict().passed()
    }

    /// Every figure so far.
    pub fn figures(&mut self) -> Vec<Figure> {
        let mut out: Vec<Figure> = Vec::new();
        let coss_energy = self.coss.energy();
        if let (Some(l), (Some(a), Some(b))) = (&self.losses, &self.snapshots) {
            // A window too short to hold two snapshots has no energy balance to report.
            if let Ok(report) = LossReport::between(l, a, b, coss_energy) {
                let report = report.with_parts(self.parts.energies());
                out.extend(report.figures(self.bias));
            }
        }
        self.each_part(|m| out.extend(m.figures()));
        out
    }
}
