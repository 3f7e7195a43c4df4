//! What a driver needs from an integration path, so the same converter and controller
//! run on the exact path ([`crate::Simulation`]) or the Dop853 reference path
//! ([`crate::reference::ReferenceRun`]) unchanged.

use nalgebra::DVector;

use crate::circuit::{Circuit, ElementId};
use crate::error::EngineError;
use crate::event::{EventFn, EventSlot, Sink, StepOutcome, Stop, Turning};
use crate::sim::EventStamp;
use crate::system::{Observation, System};
use crate::topology::Topology;

/// Where a run stands, handed from one stepper to another of the same circuit (for
/// example a settled exact run continued on the reference path).
#[derive(Clone, Debug, PartialEq)]
pub struct Handover {
    /// Seconds.
    pub time: f64,
    /// Augmented state z = [x; 1; w; s] (see [`crate::Layout`]); source values and
    /// slopes travel with it.
    pub state: Vec<f64>,
    /// Which switches and diodes conduct.
    pub topology: Topology,
}

/// An integration path: the caller advances time, changes gates and sources between
/// steps, arms events and reads probes.
pub trait Stepper {
    /// Options the path is built with.
    type Options;

    /// Checks the circuit, sets initial values and settles the diodes at t = 0.
    fn build(
        circuit: Circuit,
        observation: Observation,
        options: Self::Options,
    ) -> Result<Self, EngineError>
    where
        Self: Sized;

    /// Present time, seconds.
    fn time(&self) -> f64;

    /// The problem being simulated.
    fn system(&self) -> &System;

    /// Augmented state z = [x; 1; w; s] (see [`crate::Layout`]).
    fn state(&self) -> &DVector<f64>;

    /// Present topology.
    fn topology(&self) -> Topology;

    /// Present value of probe `k`, in the probe's own units.
    fn probe(&self, k: usize) -> f64;

    /// Present value of event signal `k` (without offset or rate).
    fn event_signal(&self, k: usize) -> f64;

    /// Integrals of the meters so far, in the order of the observation; empty on a path
    /// that does not integrate meters.
    fn meters(&self) -> Vec<f64>;

    /// Turns a switch on or off now, then settles the diodes.
    fn set_gate(&mut self, switch: ElementId, on: bool) -> Result<(), EngineError>;

    /// Sets an independent source to `value` with `slope` per second from now on
    /// (until its own waveform's next breakpoint), then settles the diodes.
    fn set_source(&mut self, source: ElementId, value: f64, slope: f64) -> Result<(), EngineError>;

    /// Replaces the dynamic states x (length nx) and settles the diodes.
    fn set_states(&mut self, x: &[f64]) -> Result<(), EngineError>;

    /// Arms an event; returns its slot.
    fn arm(&mut self, f: EventFn) -> Result<EventSlot, EngineError>;

    /// Disarms an event.
    fn disarm(&mut self, slot: EventSlot);

    /// One step towards `until` seconds: an internal step, an event, or the stop time.
    fn step_to(&mut self, until: f64, sink: &mut dyn Sink) -> Result<StepOutcome, EngineError>;

    /// Chooses the probes whose slopes and in-step extrema the run traces to sinks
    /// that want them ([`Sink::traces`]). A path that does not trace ignores it (the
    /// default): its sinks then see samples only.
    fn trace_probes(&mut self, probes: &[(usize, Turning)]) -> Result<(), EngineError> {
        let _ = probes;
        Ok(())
    }

    /// Whether the path sends a tracing sink a point after every step it takes and
    /// at every switching instant, gate or source change (the default: it does not).
    /// A driver that keeps extremes from trace points need not then read the probes
    /// itself after each step: the last point already holds the present state.
    fn traces_every_step(&self) -> bool {
        false
    }

    /// Runs until `until` seconds or until an armed event crosses.
    fn advance(&mut self, until: f64, sink: &mut dyn Sink) -> Result<Stop, EngineError> {
        loop {
            match self.step_to(until, sink)? {
                StepOutcome::StopTime => return Ok(Stop::Reached),
                StepOutcome::Event { time, armed, .. } if armed != 0 => {
                    return Ok(Stop::Armed { time, mask: armed })
                }
                _ => {}
            }
        }
    }

    /// The latest armed crossing whose instant a driver may tie a delayed action to
    /// ([`Stepper::delay_from`]); `None` on a path that carries no sensitivities (the
    /// default) or while none are tracked.
    fn last_event_stamp(&self) -> Option<EventStamp> {
        None
    }

    /// Says the present instant comes a fixed delay after the crossing `stamp`
    /// ([`crate::Simulation::delay_from`]); a no-op on a path that carries no
    /// sensitivities (the default).
    fn delay_from(&mut self, stamp: EventStamp) {
        let _ = stamp;
    }

    /// Where the run stands now.
    fn handover(&self) -> Handover;

    /// Continues from where another run of the same circuit stands: time, state and
    /// topology are taken over, the diodes settled; armed events and meters stay as
    /// they are.
    fn take_over(&mut self, from: &Handover) -> Result<(), EngineError>;
}

/// Checks a handed-over state against a layout of `nz` entries.
pub(crate) fn check_handover(from: &Handover, nz: usize) -> Result<(), EngineError> {
    if from.state.len() != nz || from.state.iter().any(|v| !v.is_finite()) {
        return Err(EngineError::BadOption {
            what: "handed-over state length",
            value: from.state.len() as f64,
            allowed: "one finite value per entry of z",
        });
    }
    if !(from.time.is_finite() && from.time >= 0.0) {
        return Err(EngineError::BadOption {
            what: "handed-over time",
            value: from.time,
            allowed: "a finite time, seconds, not negative",
        });
    }
    Ok(())
}

/// The [`Stepper`] methods both paths implement inherently (with the same names and
/// signatures), forwarded to those methods; used inside `impl Stepper for ...`.
macro_rules! forward_to_inherent {
    ($ty:ty) => {
        #[inline]
        fn time(&self) -> f64 {
            <$ty>::time(self)
        }

        #[inline]
        fn system(&self) -> &crate::system::System {
            <$ty>::system(self)
        }

        #[inline]
        fn state(&self) -> &nalgebra::DVector<f64> {
            <$ty>::state(self)
        }

        #[inline]
        fn topology(&self) -> crate::topology::Topology {
            <$ty>::topology(self)
        }

        #[inline]
        fn probe(&self, k: usize) -> f64 {
            <$ty>::probe(self, k)
        }

        #[inline]
        fn event_signal(&self, k: usize) -> f64 {
            <$ty>::event_signal(self, k)
        }

        #[inline]
        fn set_gate(
            &mut self,
            switch: crate::circuit::ElementId,
            on: bool,
        ) -> Result<(), crate::error::EngineError> {
            <$ty>::set_gate(self, switch, on)
        }

        fn set_source(
            &mut self,
            source: crate::circuit::ElementId,
            value: f64,
            slope: f64,
        ) -> Result<(), crate::error::EngineError> {
            <$ty>::set_source(self, source, value, slope)
        }

        fn set_states(&mut self, x: &[f64]) -> Result<(), crate::error::EngineError> {
            <$ty>::set_states(self, x)
        }

        fn arm(
            &mut self,
            f: crate::event::EventFn,
        ) -> Result<crate::event::EventSlot, crate::error::EngineError> {
            <$ty>::arm(self, f)
        }

        #[inline]
        fn disarm(&mut self, slot: crate::event::EventSlot) {
            <$ty>::disarm(self, slot)
        }

        fn handover(&self) -> crate::stepper::Handover {
            <$ty>::handover(self)
        }

        fn take_over(
            &mut self,
            from: &crate::stepper::Handover,
        ) -> Result<(), crate::error::EngineError> {
            <$ty>::take_over(self, from)
        }
    };
}
pub(crate) use forward_to_inherent;
