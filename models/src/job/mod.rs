//! The converter job: a validated, ready-to-run scenario ([`Job`], built by the
//! binary from a scenario file: raw file → `Job`), the plan of its measurements
//! ([`plan`]), the paper review of its design before it runs ([`review`]), its
//! periodic steady state ([`steady`]), the loop figures read from the sampled-data
//! model there ([`loop_figures`]), the limits it is judged against ([`verdict`]) and
//! its run ([`run`]).
//! Everything here is in SI units and already checked; running it needs no further
//! validation of user input.

pub mod build;
pub mod loop_figures;
pub mod plan;
pub mod review;
pub mod run;
pub mod steady;
pub mod verdict;

use stepflux_engine::{SimOptions, TimeGrid};

use crate::controller::{ControllerSpec, OutputMode};
use crate::disturbance::Disturbance;
use crate::figures::DesignPoint;
use crate::gate::OpenLoopGate;
use crate::template::ForwardDesign;

/// How the switches are driven.
// One per job, built once: boxing the controller would only add an indirection.
#[allow(clippy::large_enum_variant)]
#[derive(Clone, Debug, PartialEq)]
pub enum Drive {
    /// Fixed frequency and duty.
    OpenLoop(OpenLoopGate),
    /// The behavioural PWM controller.
    Controller(ControllerSpec),
}

/// Initial state of the run.
#[derive(Clone, Debug, PartialEq)]
pub enum Start {
    /// Every inductor current and capacitor voltage at zero (a cold start).
    Zero,
    /// Given values of the dynamic states, in the engine's state order (deprecated:
    /// use [`Start::Named`]).
    States(Vec<f64>),
    /// Given values of named states; states not named keep their initial values.
    Named(Vec<NamedState>),
    /// The periodic steady state of the initial operating point, found by shooting;
    /// the controller's soft starts do not apply (it has been running for ever).
    Steady,
}

/// One state given by its owner's name.
#[derive(Clone, Debug, PartialEq)]
pub struct NamedState {
    /// Element name (`lout`, `cout`, `ctl.ea.c1`).
    pub name: String,
    /// SI value.
    pub value: f64,
    /// The unit the value was written with ("A", "V"), `None` for a plain number.
    pub unit: Option<&'static str>,
}

/// Time settings of a run.
#[derive(Clone, Debug, PartialEq)]
pub struct Analysis {
    /// End of the run, seconds.
    pub stop_time: f64,
    /// Waveform output interval, seconds (switching instants are always saved too).
    pub sample_interval: f64,
    /// Initial state.
    pub start: Start,
}

/// Spec limits a run is judged against; `None` means not checked.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct Limits {
    /// Highest start-up overshoot, percent of the set point.
    pub startup_overshoot_percent: Option<f64>,
    /// Longest start-up time to 90 % of the set point, seconds.
    pub startup_time: Option<f64>,
    /// Largest deviation after a load or line step, percent of the set point.
    pub step_deviation_percent: Option<f64>,
    /// Longest recovery into the band after a step, seconds.
    pub recovery_time: Option<f64>,
    /// Recovery band, percent of the set point (default 1 %).
    pub recovery_band_percent: Option<f64>,
    /// Largest output ripple peak-to-peak, volts.
    pub ripple: Option<f64>,
    /// Smallest reset margin, percent of the period.
    pub reset_margin_percent: Option<f64>,
    /// Smallest flux-density margin below Bsat, percent.
    pub flux_margin_percent: Option<f64>,
    /// Lowest efficiency of the power stage over the final window, percent.
    pub efficiency_percent: Option<f64>,
    /// Smallest phase margin of the sampled-data loop gain at the steady state, degrees.
    pub phase_margin_degrees: Option<f64>,
    /// Smallest gain margin there, dB.
    pub gain_margin_db: Option<f64>,
    /// Lowest crossover frequency, hertz.
    pub crossover_min: Option<f64>,
    /// Highest crossover frequency, hertz.
    pub crossover_max: Option<f64>,
}

impl Limits {
    /// Whether any limit needs the loop gain (the loop figures of
    /// [`crate::loopgain::FIGURES`]).
    pub fn on_loop_gain(&self) -> bool {
        self.phase_margin_degrees.is_some()
            || self.gain_margin_db.is_some()
            || self.crossover_min.is_some()
            || self.crossover_max.is_some()
    }
}

/// One scenario, ready to run.
#[derive(Clone, Debug, PartialEq)]
pub struct Job {
    /// Name, also the output folder name (already checked to be a safe single path
    /// component).
    pub name: String,
    /// Free text for reports.
    pub description: String,
    /// The power stage.
    pub design: ForwardDesign,
    /// How it is driven.
    pub drive: Drive,
    /// Load, line and reference steps.
    pub disturbances: Vec<Disturbance>,
    /// Time settings.
    pub analysis: Analysis,
    /// Spec limits.
    pub limits: Limits,
    /// Probe names to save as waveforms (empty: all).
    pub signals: Vec<String>,
    /// Fixed controller bias power for whole-converter efficiency, watts.
    pub bias_power: f64,
    /// The scenario as given, echoed into outputs.
    pub source_text: String,
}

impl Job {
    /// The drive as the run simulates it: started in steady state, the controller has
    /// been running for ever, so its soft starts are over (their parts are left out).
    pub fn simulated_drive(&self) -> Drive {
        match (&self.drive, &self.analysis.start) {
            (Drive::Controller(spec), Start::Steady) => {
                Drive::Controller(crate::steady::map::settled_spec(spec))
            }
            (drive, _) => drive.clone(),
        }
    }

    /// The job at input voltage `line` with its load replaced by a constant-current
    /// sink of `current` amperes: one point of an efficiency sweep, the same current
    /// whatever the output voltage does on the way.
    pub fn at_line_and_load(&self, line: f64, current: f64) -> Job {
        let mut j = self.clone();
        j.design.input.voltage = line;
        j.design.load = crate::components::Load {
            resistance: None,
            current: Some(current),
        };
        j
    }

    /// The paper design figures (closed forms) at the job's design point: computed
    /// here only, for the check, the review, the plots' markers and the summary.
    pub fn design_figures(&self) -> crate::figures::DesignFigures {
        crate::figures::DesignFigures::compute(&self.design, &self.design_point())
    }

    /// Where the design figures are evaluated: the clock (the main switch's frequency,
    /// half the clock in alternating mode), the duty clamp, the set point, and the
    /// lowest and highest line over the job's line steps.
    pub fn design_point(&self) -> DesignPoint {
        let job = self;
        let lines = std::iter::once(job.design.input.voltage).chain(
            job.disturbances.iter().filter_map(|d| match d {
                Disturbance::Line { to, .. } => Some(*to),
                _ => None,
            }),
        );
        let (low_line, high_line) =
            lines.fold((f64::MAX, f64::MIN), |(lo, hi), v| (lo.min(v), hi.max(v)));
        match &job.drive {
            Drive::OpenLoop(g) => DesignPoint {
                frequency: g.frequency,
                max_duty: g.duty,
                set_point: None,
                low_line,
                high_line,
            },
            Drive::Controller(c) => DesignPoint {
                // In alternating mode the main switch runs on output A, at half the clock.
                frequency: match c.mode {
                    OutputMode::SingleEnded => c.oscillator.frequency,
                    OutputMode::Alternating => c.oscillator.frequency / 2.0,
                },
                max_duty: c.max_duty,
                set_point: Some(c.voltage_loop.set_point()),
                low_line,
                high_line,
            },
        }
    }

    /// The sample interval as the run will keep it, on its integer time grid (the
    /// run's options are those of the drive's clock period), and the grid's tick,
    /// seconds.
    pub fn sample_interval_on_grid(&self) -> Option<(f64, f64)> {
        let job = self;
        let period = match &job.drive {
            Drive::Controller(c) => c.clock_period(),
            Drive::OpenLoop(g) => g.period(),
        };
        let o = SimOptions::for_period(period);
        let grid = TimeGrid::new(o.max_step, o.event_resolution).ok()?;
        let ticks = grid.tick(job.analysis.sample_interval).max(1);
        Some((grid.time(ticks), grid.quantum))
    }
}
