//! The period map P: the dynamic states at one period boundary to those one period
//! (two clock periods in alternating mode) later, for the open-loop gate and for the
//! closed loop. Each evaluation returns the same run to the same boundary instant
//! (`ConverterRun::restore`) with trial states, so the topology cache and its
//! propagators are built once and shared by every trial. The maps carry no energy
//! meters: nothing in a search reads them, and a meter makes every topology's ladder
//! carry Van Loan's block exponential per rung, which was two thirds of the
//! instructions of a search from a fresh run (measured with callgrind on the demo).
//! Figures that need the energy account come from a run started at the steady state.
//!
//! [`PeriodMap::run_with_jacobian`] runs the same period with the engine's
//! sensitivities on and returns ∂P/∂x with P(x). The open-loop gate acts at scheduled
//! instants only; the closed loop's delayed turn-off is tied to its comparator crossing
//! in `controller/modulator.rs`, so both maps' Jacobians include every saltation.

use nalgebra::DMatrix;
use stepflux_engine::{NullSink, SimOptions};

use super::names::{state_names, StateName};
use crate::controller::modulator::{ClosedLoop, LoopSnapshot};
use crate::controller::{ControllerSpec, OutputMode};
use crate::cycles::CycleSink;
use crate::error::ModelError;
use crate::gate::OpenLoopGate;
use crate::run::{ConverterRun, RunSnapshot};
use crate::template::{Converter, ForwardDesign};

/// A cycle sink that drops every record (trial periods keep none).
pub(crate) struct Discard;

impl CycleSink for Discard {
    fn cycle(&mut self, _record: &crate::cycles::CycleRecord) {}
}

/// One period of a converter under its drive, from a fixed boundary instant.
pub trait PeriodMap {
    /// Names of the dynamic states, in the order of x.
    fn names(&self) -> &[StateName];

    /// Length of one map period, seconds.
    fn period(&self) -> f64;

    /// The states the run was built with (its initial values), at the boundary.
    fn initial(&self) -> Vec<f64>;

    /// Where the search starts: the initial values unless the map knows better.
    fn guess(&self) -> Vec<f64> {
        self.initial()
    }

    /// P(x0): runs `periods` map periods from the boundary with states `x0`, handing
    /// cycle records to `cycles`, and returns the states at the end.
    fn run_from(
        &mut self,
        x0: &[f64],
        periods: usize,
        cycles: &mut dyn CycleSink,
    ) -> Result<Vec<f64>, ModelError>;

    /// P(x0) with the cycle records dropped.
    fn apply(&mut self, x0: &[f64]) -> Result<Vec<f64>, ModelError> {
        self.run_from(x0, 1, &mut Discard)
    }

    /// Pᵐ(x0) over m = `periods` map periods and its Jacobian ∂Pᵐ/∂x0, the monodromy
    /// matrix the engine carries along the same run (step propagators and saltation
    /// matrices, [`stepflux_engine::Simulation::track_sensitivity`]); the Jacobian is
    /// `None` when the map cannot give it (the default: the search then forms it by
    /// differences) or the run met an instant it could not account for.
    fn run_with_jacobian(
        &mut self,
        x0: &[f64],
        periods: usize,
    ) -> Result<(Vec<f64>, Option<DMatrix<f64>>), ModelError> {
        Ok((self.run_from(x0, periods, &mut Discard)?, None))
    }
}

fn states_of(run: &ConverterRun) -> Vec<f64> {
    let nx = run.sim.system().layout().nx();
    run.sim.state().as_slice()[..nx].to_vec()
}

/// The states and their sensitivity to the states the run was restored with, and
/// the run back to carrying none.
fn states_and_jacobian(run: &mut ConverterRun) -> (Vec<f64>, Option<DMatrix<f64>>) {
    let jac = run.sim.sensitivity().cloned();
    run.sim.track_sensitivity(false);
    (states_of(run), jac)
}

/// Options for trial periods: no samples (nothing is written), events located to
/// 1e-12 of the period. The finer event grid matters: a switching instant is located to
/// one tick, so P is a staircase in the control voltage with steps of one tick of
/// duty; at the run default (1e-9 of the period) one step moves the output inductor
/// current of the demo by about 5 µA, above the tolerance, while here it is 5 nA.
pub fn trial_options(period: f64) -> SimOptions {
    SimOptions {
        event_resolution: 1e-12 * period,
        ..SimOptions::for_period(period)
    }
}

/// The open-loop gate driving a converter from t = 0.
pub struct OpenLoopMap {
    run: ConverterRun,
    gate: OpenLoopGate,
    at: RunSnapshot,
    names: Vec<StateName>,
}

impl OpenLoopMap {
    /// Builds the run of `conv` under `gate`.
    pub fn new(
        conv: &Converter,
        gate: OpenLoopGate,
        options: SimOptions,
    ) -> Result<Self, ModelError> {
        gate.validate()?;
        let run = ConverterRun::with_meters(conv, options, Vec::new(), Vec::new())?;
        let names = state_names(run.sim.system());
        Ok(OpenLoopMap {
            at: run.snapshot(),
            run,
            gate,
            names,
        })
    }
}

impl PeriodMap for OpenLoopMap {
    fn names(&self) -> &[StateName] {
        &self.names
    }

    fn period(&self) -> f64 {
        self.gate.period()
    }

    fn initial(&self) -> Vec<f64> {
        let nx = self.names.len();
        self.at.handover.state[..nx].to_vec()
    }

    fn run_from(
        &mut self,
        x0: &[f64],
        periods: usize,
        cycles: &mut dyn CycleSink,
    ) -> Result<Vec<f64>, ModelError> {
        self.run.restore(&self.at, x0)?;
        self.gate
            .run_periods(&mut self.run, periods, &mut NullSink, cycles)?;
        self.run.finish(cycles);
        Ok(states_of(&self.run))
    }

    fn run_with_jacobian(
        &mut self,
        x0: &[f64],
        periods: usize,
    ) -> Result<(Vec<f64>, Option<DMatrix<f64>>), ModelError> {
        self.run.restore(&self.at, x0)?;
        self.run.sim.track_sensitivity(true);
        let ran = self
            .gate
            .run_periods(&mut self.run, periods, &mut NullSink, &mut Discard);
        let out = states_and_jacobian(&mut self.run);
        ran?;
        Ok(out)
    }
}

impl OpenLoopMap {
    /// The run as it stands after the last [`PeriodMap::run_from`].
    pub fn run(&self) -> &ConverterRun {
        &self.run
    }
}

/// The controller as it runs once its soft starts are over: the periodic steady state
/// does not depend on them, so they are left out (duty soft start and reference ramp
/// at zero) and the boundary is the first clock edge.
pub fn settled_spec(spec: &ControllerSpec) -> ControllerSpec {
    let mut s = spec.clone();
    s.soft_start = 0.0;
    s.voltage_loop.reference_soft_start = 0.0;
    s
}

/// The closed loop from its first clock edge, without disturbances.
pub struct ClosedLoopMap {
    lp: ClosedLoop,
    at: LoopSnapshot,
    names: Vec<StateName>,
    clocks: u64,
    guess: Vec<f64>,
}

impl ClosedLoopMap {
    /// Builds `design` under `spec` (with [`settled_spec`] applied); the map period is one clock period, two in alternating mode (an output's
    /// period).
    pub fn new(
        design: &ForwardDesign,
        spec: &ControllerSpec,
        options: SimOptions,
    ) -> Result<Self, ModelError> {
        let spec = settled_spec(spec);
        let lp = ClosedLoop::with_meters(design, &spec, &[], options, |_| Ok(Vec::new()))?;
        let clocks = match spec.mode {
            OutputMode::SingleEnded => 1,
            OutputMode::Alternating => 2,
        };
        let names = state_names(lp.run.sim.system());
        let at = lp.snapshot();
        let mut guess = at.run.handover.state[..names.len()].to_vec();
        averaged_guess(design, &spec, &names, &mut guess);
        Ok(ClosedLoopMap {
            at,
            names,
            guess,
            lp,
            clocks,
        })
    }

    /// The loop as it stands.
    pub fn closed_loop(&self) -> &ClosedLoop {
        &self.lp
    }

    /// Sets the volts added to the control voltage at the comparator for the periods
    /// run from now on ([`ClosedLoop::control_offset`]).
    pub fn set_control_offset(&mut self, volts: f64) {
        self.lp.control_offset = volts;
    }

    /// The error amplifier's output `t` seconds after the boundary (within the first
    /// period), running from `x0` with no injection; for the injected loop gain's
    /// sampling-instant reference ([`crate::loopgain::inject`]).
    pub fn control_voltage_at(&mut self, x0: &[f64], t: f64) -> Result<f64, ModelError> {
        self.lp.restore(&self.at, x0)?;
        let t_end = self.at.run.handover.time + t;
        self.lp.advance_to_end(t_end, &mut NullSink, &mut Discard)?;
        Ok(self.lp.control_node_voltage())
    }
}

impl PeriodMap for ClosedLoopMap {
    fn names(&self) -> &[StateName] {
        &self.names
    }

    fn period(&self) -> f64 {
        self.clocks as f64 * self.lp.spec.clock_period()
    }

    fn initial(&self) -> Vec<f64> {
        let nx = self.names.len();
        self.at.run.handover.state[..nx].to_vec()
    }

    fn guess(&self) -> Vec<f64> {
        self.guess.clone()
    }

    fn run_from(
        &mut self,
        x0: &[f64],
        periods: usize,
        cycles: &mut dyn CycleSink,
    ) -> Result<Vec<f64>, ModelError> {
        self.lp.restore(&self.at, x0)?;
        let t_end = self.at.run.handover.time + periods as f64 * self.period();
        self.lp.run_until(t_end, &mut NullSink, cycles)?;
        Ok(states_of(&self.lp.run))
    }

    fn run_with_jacobian(
        &mut self,
        x0: &[f64],
        periods: usize,
    ) -> Result<(Vec<f64>, Option<DMatrix<f64>>), ModelError> {
        self.lp.restore(&self.at, x0)?;
        self.lp.run.sim.track_sensitivity(true);
        let t_end = self.at.run.handover.time + periods as f64 * self.period();
        let ran = self.lp.advance_to(t_end, &mut NullSink, &mut Discard);
        let out = states_and_jacobian(&mut self.lp.run);
        ran?;
        Ok(out)
    }
}

/// Starts the closed loop at the equilibrium of its state-space-averaged model
/// ([`crate::averaged::AveragedModel`], Middlebrook & Ćuk 1976), whose states carry the
/// same element names: output filter and voltage-loop compensation land near their
/// steady values, which spares Newton the large first steps through the duty clamp.
/// States the averaged model does not have (magnetising current, current limit) keep
/// their initial values; a design it cannot model keeps them all.
fn averaged_guess(
    design: &ForwardDesign,
    spec: &ControllerSpec,
    names: &[StateName],
    x: &mut [f64],
) {
    let Ok(avg) = crate::averaged::AveragedModel::new(design, spec) else {
        return;
    };
    for (name, value) in avg.closed_loop.states.iter().zip(avg.equilibrium.iter()) {
        if let Some(k) = names.iter().position(|n| &n.name == name) {
            x[k] = *value;
        }
    }
}
