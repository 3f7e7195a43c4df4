//! The controller's sequential part: clock, one-pulse-per-period latch, duty clamp with
//! soft start, leading-edge blanking, minimum on-time, gate delay, output modes and
//! under-voltage lockout, driving a [`ConverterRun`] cycle by cycle.
//!
//! Within a clock period the order is fixed (and so deterministic): lockout check at the
//! clock; pulse skipped if the control voltage already demands no duty; turn-on after
//! the gate delay; the comparator is armed once blanking and the minimum on-time have
//! passed; the pulse ends at the first of the comparator crossing and the duty clamp,
//! plus the gate delay. Nothing can turn the switch on again before the next clock: that
//! is the latch.

use stepflux_engine::{
    Direction, EventFn, EventStamp, Meter, Signal, SimOptions, Simulation, Sink, Stepper, Stop,
};

use super::{ControllerParts, ControllerSpec, OutputMode};
use crate::cycles::CycleSink;
use crate::disturbance::{prepare, Disturbance};
use crate::error::ModelError;
use crate::run::{ConverterRun, RunSnapshot};
use crate::template::{Converter, ForwardDesign};

/// Event-signal index of the control voltage in the run (0 is the magnetising current).
const CONTROL_SIGNAL: usize = 1;

/// Where a [`ClosedLoop`] stands at a clock edge: the converter run and the
/// controller's sequential state.
#[derive(Clone, Debug)]
pub struct LoopSnapshot {
    /// The converter run.
    pub run: RunSnapshot,
    enabled_at: Option<f64>,
    clock: u64,
    complement_on: bool,
}

/// A converter under closed-loop control, on the exact path unless another [`Stepper`]
/// is named.
pub struct ClosedLoop<S = Simulation> {
    /// The converter run.
    pub run: ConverterRun<S>,
    /// The controller.
    pub spec: ControllerSpec,
    /// The converter with the controller's parts, as simulated.
    pub converter: Converter,
    parts: ControllerParts,
    /// When switching was last enabled by the lockout (None: locked out).
    enabled_at: Option<f64>,
    clock: u64,
    /// Whether the complementary (auxiliary) switch is on.
    complement_on: bool,
    /// Where the run ends inside a clock period being cut short (infinite otherwise).
    horizon: f64,
    /// Volts added to the control voltage where the comparator and the skip test read
    /// it (0 in normal runs): the small-signal injection point of the sampled-data loop
    /// gain ([`crate::loopgain`]), between the error amplifier's output and the PWM
    /// comparator. The caller holds it over whole periods; snapshots do not carry it.
    pub control_offset: f64,
}

impl ClosedLoop<Simulation> {
    /// Builds the power stage, attaches the controller and prepares the disturbances.
    pub fn new(
        design: &ForwardDesign,
        spec: &ControllerSpec,
        disturbances: &[Disturbance],
        options: SimOptions,
    ) -> Result<Self, ModelError> {
        Self::with_meters(design, spec, disturbances, options, |_| Ok(Vec::new()))
    }

    /// As [`ClosedLoop::new`], with engine meters made from the converter as simulated
    /// (power stage, controller parts and disturbance branches).
    pub fn with_meters(
        design: &ForwardDesign,
        spec: &ControllerSpec,
        disturbances: &[Disturbance],
        options: SimOptions,
        meters: impl FnOnce(&Converter) -> Result<Vec<Meter>, ModelError>,
    ) -> Result<Self, ModelError> {
        Self::with_stepper(design, spec, disturbances, options, meters)
    }

    /// Simulation options suited to this controller's clock.
    pub fn default_options(spec: &ControllerSpec) -> SimOptions {
        SimOptions::for_period(spec.clock_period())
    }
}

impl<S: Stepper> ClosedLoop<S> {
    /// As [`ClosedLoop::with_meters`], on the stepper `S` built with `options`.
    pub fn with_stepper(
        design: &ForwardDesign,
        spec: &ControllerSpec,
        disturbances: &[Disturbance],
        options: S::Options,
        meters: impl FnOnce(&Converter) -> Result<Vec<Meter>, ModelError>,
    ) -> Result<Self, ModelError> {
        let conv = design.build()?;
        let (with_ctl, parts) = spec.attach(&conv)?;
        let (converter, actions) = prepare(&with_ctl, disturbances, Some(parts.reference))?;
        Self::assemble(converter, parts, actions, spec, options, meters)
    }

    /// The loop on a converter already built with the controller's `parts` attached
    /// and the disturbances prepared (their `actions`).
    pub fn assemble(
        converter: Converter,
        parts: ControllerParts,
        actions: Vec<(f64, crate::run::Action)>,
        spec: &ControllerSpec,
        options: S::Options,
        meters: impl FnOnce(&Converter) -> Result<Vec<Meter>, ModelError>,
    ) -> Result<Self, ModelError> {
        let control = Signal::of(stepflux_engine::Quantity::NodeVoltage(parts.control));
        let meters = meters(&converter)?;
        let mut run = ConverterRun::with_stepper(&converter, options, vec![control], meters)?;
        run.schedule(actions);
        let enabled_at = if spec.lockout.is_some() {
            None
        } else {
            Some(0.0)
        };
        Ok(ClosedLoop {
            run,
            spec: spec.clone(),
            converter,
            parts,
            enabled_at,
            clock: 0,
            complement_on: false,
            horizon: f64::INFINITY,
            control_offset: 0.0,
        })
    }

    /// Continues from where `other` (the same design, controller and disturbances, on
    /// any stepper) stands, at a clock edge: the converter run and the controller's
    /// sequential state.
    pub fn continue_from<T: Stepper>(&mut self, other: &ClosedLoop<T>) -> Result<(), ModelError> {
        self.run.continue_from(&other.run)?;
        self.enabled_at = other.enabled_at;
        self.clock = other.clock;
        self.complement_on = other.complement_on;
        Ok(())
    }

    /// Where the loop stands; take it at a clock edge (after [`ClosedLoop::advance_to`]).
    pub fn snapshot(&self) -> LoopSnapshot {
        LoopSnapshot {
            run: self.run.snapshot(),
            enabled_at: self.enabled_at,
            clock: self.clock,
            complement_on: self.complement_on,
        }
    }

    /// Returns to `at` (a snapshot of this loop) with the dynamic states replaced by
    /// `x`; see [`ConverterRun::restore`].
    pub fn restore(&mut self, at: &LoopSnapshot, x: &[f64]) -> Result<(), ModelError> {
        self.run.restore(&at.run, x)?;
        self.enabled_at = at.enabled_at;
        self.clock = at.clock;
        self.complement_on = at.complement_on;
        Ok(())
    }

    /// Clock periods completed so far.
    pub fn clock_count(&self) -> u64 {
        self.clock
    }

    /// Where the controller sits in the circuit.
    pub fn parts(&self) -> &ControllerParts {
        &self.parts
    }

    /// Runs whole clock periods until `t_end` seconds and closes the last cycle record.
    pub fn run_until(
        &mut self,
        t_end: f64,
        sink: &mut dyn Sink,
        cycles: &mut dyn CycleSink,
    ) -> Result<(), ModelError> {
        self.advance_to(t_end, sink, cycles)?;
        self.run.finish(cycles);
        Ok(())
    }

    /// Runs whole clock periods until `t_end` seconds, leaving the last cycle open so a
    /// long run can be driven in slices (for progress reports); end with
    /// [`ClosedLoop::finish`].
    pub fn advance_to(
        &mut self,
        t_end: f64,
        sink: &mut dyn Sink,
        cycles: &mut dyn CycleSink,
    ) -> Result<(), ModelError> {
        let period = self.spec.clock_period();
        while (self.clock as f64 + 1.0) * period <= t_end * (1.0 + 1e-12) {
            self.clock_period(sink, cycles)?;
            self.clock += 1;
        }
        Ok(())
    }

    /// As [`ClosedLoop::advance_to`], then on through the clock period that `t_end`
    /// cuts, so the run ends at `t_end` exactly: the controller behaves in that period
    /// as in any other until the run stops. The cycle record it opens is left open for
    /// [`ClosedLoop::finish`] (it ends before its period does).
    pub fn advance_to_end(
        &mut self,
        t_end: f64,
        sink: &mut dyn Sink,
        cycles: &mut dyn CycleSink,
    ) -> Result<(), ModelError> {
        self.advance_to(t_end, sink, cycles)?;
        // Anything shorter than the event resolution (1e-9 of a period) is already
        // the end.
        if t_end - self.run.sim.time() <= 1e-9 * self.spec.clock_period() {
            return Ok(());
        }
        self.horizon = t_end;
        let cut = self.clock_period(sink, cycles);
        self.horizon = f64::INFINITY;
        cut
    }

    /// Advances to `t`, or only to the horizon when that comes first: `None` then
    /// says the period was cut and nothing more may happen in it.
    fn go(&mut self, t: f64, sink: &mut dyn Sink) -> Result<Option<Stop>, ModelError> {
        if t < self.horizon {
            return self.run.advance(t, sink).map(Some);
        }
        match self.run.advance(self.horizon, sink)? {
            armed @ Stop::Armed { .. } => Ok(Some(armed)),
            Stop::Reached => Ok(None),
        }
    }

    /// Closes the last cycle record.
    pub fn finish(&mut self, cycles: &mut dyn CycleSink) {
        self.run.finish(cycles);
    }

    /// Ramp value at `t` in the period starting at `t0`: falling from peak to valley.
    fn ramp(&self, t0: f64, t: f64) -> f64 {
        let o = &self.spec.oscillator;
        o.peak - (o.peak - o.valley) * (t - t0) / self.spec.clock_period()
    }

    /// The error amplifier's output now, volts, without the injection.
    pub fn control_node_voltage(&self) -> f64 {
        self.run.sim.event_signal(CONTROL_SIGNAL)
    }

    /// The control voltage as the modulator sees it: the node plus the injection.
    fn control_voltage(&self) -> f64 {
        self.run.sim.event_signal(CONTROL_SIGNAL) + self.control_offset
    }

    fn update_lockout(&mut self, t0: f64) {
        let Some(l) = &self.spec.lockout else { return };
        let vin = self.run.probe("in.v").unwrap_or(0.0);
        match self.enabled_at {
            None if vin >= l.start => self.enabled_at = Some(t0),
            Some(_) if vin < l.stop => self.enabled_at = None,
            _ => {}
        }
    }

    /// Duty limit for this clock period, as a fraction of the clock period.
    fn clamp_duty(&self, t0: f64) -> f64 {
        let per_output = match self.spec.mode {
            OutputMode::SingleEnded => self.spec.max_duty,
            // An output's period is two clock periods.
            OutputMode::Alternating => 2.0 * self.spec.max_duty,
        };
        let since = self.enabled_at.map_or(0.0, |e| t0 - e);
        let ramp_up = if self.spec.soft_start > 0.0 {
            (since / self.spec.soft_start).min(1.0)
        } else {
            1.0
        };
        per_output * ramp_up
    }

    /// Whether the auxiliary switch runs complementary to the main one: single-ended
    /// mode on a template that has one (the active clamp).
    fn complementary(&self) -> bool {
        self.spec.mode == OutputMode::SingleEnded && self.run.key.aux_switch.is_some()
    }

    fn set_complement(&mut self, on: bool) -> Result<(), ModelError> {
        if self.complementary() && self.complement_on != on {
            self.run.set_aux(on)?;
            self.complement_on = on;
        }
        Ok(())
    }

    fn set_output(&mut self, b_side: bool, on: bool) -> Result<(), ModelError> {
        if b_side {
            self.run.set_aux(on)
        } else {
            self.run.set_main(on)
        }
    }

    fn clock_period(
        &mut self,
        sink: &mut dyn Sink,
        cycles: &mut dyn CycleSink,
    ) -> Result<(), ModelError> {
        let t_clock = self.spec.clock_period();
        let t0 = self.clock as f64 * t_clock;
        let t_next = t0 + t_clock;
        self.update_lockout(t0);
        let b_side = self.spec.mode == OutputMode::Alternating && self.clock % 2 == 1;
        let limit = if self.enabled_at.is_some() {
            self.clamp_duty(t0)
        } else {
            0.0
        };
        if limit <= 0.0 || self.control_voltage() >= self.spec.oscillator.peak {
            if self.enabled_at.is_none() {
                self.set_complement(false)?;
            }
            self.go(t_next, sink)?;
            return Ok(());
        }
        let delay = self.spec.gate_delay;
        if self.complement_on {
            // The complementary switch leaves a dead time before the main turn-on (no
            // earlier than the clock itself).
            if self
                .go(t0 + delay - self.spec.aux_dead_time, sink)?
                .is_none()
            {
                return Ok(());
            }
            self.set_complement(false)?;
        }
        if self.go(t0 + delay, sink)?.is_none() {
            return Ok(());
        }
        self.set_output(b_side, true)?;
        let output_period = if self.spec.mode == OutputMode::Alternating {
            2.0 * t_clock
        } else {
            t_clock
        };
        if !b_side {
            self.run
                .start_cycle(output_period, limit * t_clock / output_period, cycles);
        }
        let t_limit = t0 + limit * t_clock;
        let Some((t_off, tripped)) = self.pulse_end(t0, t_limit, sink)? else {
            return Ok(());
        };
        if self.go(t_off + delay, sink)?.is_none() {
            return Ok(());
        }
        self.follow(tripped);
        self.set_output(b_side, false)?;
        if !b_side {
            self.run.set_cycle_duty((t_off - t0) / output_period);
        }
        if self.complementary() {
            if self
                .go(t_off + delay + self.spec.aux_dead_time, sink)?
                .is_none()
            {
                return Ok(());
            }
            self.follow(tripped);
            self.set_complement(true)?;
        }
        self.go(t_next, sink)?;
        Ok(())
    }

    /// Tells the stepper that what changes now follows the comparator's crossing
    /// `tripped` by a fixed delay, so its instant moves with the state (for the
    /// sensitivities behind the steady-state search; see
    /// [`stepflux_engine::Simulation::delay_from`]). Instants set by the clock or the
    /// duty clamp (`None`) do not.
    fn follow(&mut self, tripped: Option<EventStamp>) {
        if let Some(stamp) = tripped {
            self.run.sim.delay_from(stamp);
        }
    }

    /// When the pulse's off command comes: the comparator crossing after blanking and
    /// minimum on-time (with its stamp), or the duty clamp, whichever is first; `None`
    /// when the run ends before it.
    fn pulse_end(
        &mut self,
        t0: f64,
        t_limit: f64,
        sink: &mut dyn Sink,
    ) -> Result<Option<(f64, Option<EventStamp>)>, ModelError> {
        let t_arm = t0 + self.spec.blanking.max(self.spec.min_on_time);
        if t_arm >= t_limit {
            return Ok(Some((t_limit, None)));
        }
        if self.go(t_arm, sink)?.is_none() {
            return Ok(None);
        }
        let t_arm = t_arm.max(self.run.sim.time());
        if self.control_voltage() >= self.ramp(t0, t_arm) {
            return Ok(Some((t_arm, None)));
        }
        let o = &self.spec.oscillator;
        let slot = self.run.sim.arm(EventFn {
            signal: CONTROL_SIGNAL,
            offset: self.control_offset - o.peak,
            rate: (o.peak - o.valley) / self.spec.clock_period(),
            t_ref: t0,
            direction: Direction::Rising,
        })?;
        let stop = self.go(t_limit, sink)?;
        self.run.sim.disarm(slot);
        Ok(match stop {
            Some(Stop::Armed { time, .. }) => Some((time, self.run.sim.last_event_stamp())),
            Some(Stop::Reached) => Some((t_limit, None)),
            None => None,
        })
    }
}
