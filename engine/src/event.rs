//! Events are data: functions of the state and time whose sign change the stepper
//! locates, and the reasons a step or an advance stops.

use crate::circuit::ElementId;
use crate::topology::Topology;

/// Which way a crossing must go to count.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Direction {
    /// From below to above zero.
    Rising,
    /// From above to below zero.
    Falling,
}

/// g(t) = signal(z) + offset + rate·(t − t_ref), watched for a zero crossing in
/// `direction`. `signal` indexes [`crate::Observation::event_signals`]. The time term
/// lets a comparator be set against a linear ramp without a state for the ramp.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct EventFn {
    /// Index into the run's event signals.
    pub signal: usize,
    /// Constant added to the signal.
    pub offset: f64,
    /// Added per second after `t_ref`.
    pub rate: f64,
    /// Reference time of the rate term, seconds.
    pub t_ref: f64,
    /// Crossing direction.
    pub direction: Direction,
}

/// Handle of an armed event; also its bit in [`StepOutcome::Event`] masks.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct EventSlot(pub u8);

/// Most events armed at once (one bit each in a mask).
pub const MAX_ARMED: usize = 64;

/// Why one internal step stopped.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum StepOutcome {
    /// A step of the grid, nothing happened.
    Internal,
    /// Events fired at `time`: diodes changed state and/or armed events crossed.
    Event {
        /// Seconds.
        time: f64,
        /// Bit k set when armed slot k crossed.
        armed: u64,
        /// First diode that changed state, if any.
        diode: Option<ElementId>,
    },
    /// The requested stop time was reached.
    StopTime,
}

/// Why [`crate::Simulation::advance`] returned.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Stop {
    /// The requested time was reached.
    Reached,
    /// Armed events crossed at `time` (bit k for slot k).
    Armed {
        /// Seconds.
        time: f64,
        /// Bit k set when slot k crossed.
        mask: u64,
    },
}

/// Receives samples as a run goes. Probe values come in the order the run's
/// [`crate::Observation::probes`] lists them.
pub trait Sink {
    /// One sample. `at_event` marks samples taken at a switching instant (after the
    /// switching) rather than on the fixed output interval.
    fn sample(&mut self, time: f64, values: &[f64], at_event: bool) -> Result<(), String>;

    /// The topology changed at `time` from `before` to `after` (bit k is
    /// [`crate::Layout::switchable`]`[k]`). Called just before the flagged sample of
    /// that instant. The default ignores it.
    fn topology_change(
        &mut self,
        time: f64,
        before: Topology,
        after: Topology,
    ) -> Result<(), String> {
        let _ = (time, before, after);
        Ok(())
    }

    /// Whether the sink wants anything at all; when false the stepper skips it, and
    /// the probe values it would have been sent are not computed. The default is true.
    fn listens(&self) -> bool {
        true
    }

    /// One point of the exact solution (see [`TracePoint`]): the end of every step,
    /// every switching instant and every extremum of a traced probe inside a step, in
    /// time order. Unlike [`Sink::sample`], where these points fall depends only on the
    /// circuit, never on the output sample interval. The default ignores it.
    fn trace(&mut self, point: &TracePoint<'_>) -> Result<(), String> {
        let _ = point;
        Ok(())
    }

    /// Whether the sink wants [`Sink::trace`] points; when false none are computed.
    /// The default is false.
    fn traces(&self) -> bool {
        false
    }
}

/// Which turning points of a traced probe the trace locates inside steps.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Turning {
    /// Maxima only (a peak stress).
    Maxima,
    /// Minima only.
    Minima,
    /// Both (a ripple, a magnitude).
    Both,
}

/// Where a [`TracePoint`] falls.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum TraceKind {
    /// The end of a step, before anything switches there.
    Step,
    /// Just after a switching instant, gate or source change (the new topology).
    Event,
    /// Inside a step, where traced probe `k`'s slope changes sign: its maximum or
    /// minimum there, located to one tick.
    Extremum(usize),
}

/// One point of the exact solution handed to [`Sink::trace`].
#[derive(Clone, Copy, Debug)]
pub struct TracePoint<'a> {
    /// Seconds.
    pub time: f64,
    /// Traced probes' values ([`crate::Simulation::trace_probes`]), indexed in the
    /// order of [`crate::Observation::probes`]; NaN for probes not traced.
    pub values: &'a [f64],
    /// Traced probes' time derivatives (per second) in the present topology; NaN for
    /// probes not traced.
    pub slopes: &'a [f64],
    /// Where it falls.
    pub kind: TraceKind,
    /// The topology the values and slopes belong to.
    pub topology: Topology,
}

/// A sink that drops everything, for runs that only want measurements.
pub struct NullSink;

impl Sink for NullSink {
    fn sample(&mut self, _: f64, _: &[f64], _: bool) -> Result<(), String> {
        Ok(())
    }

    fn listens(&self) -> bool {
        false
    }
}

/// Checks an event before arming it among `n_signals` event signals and returns the
/// first free slot of `slots` (shared by the exact and the reference path).
pub(crate) fn free_slot<T>(
    f: &EventFn,
    n_signals: usize,
    slots: &[Option<T>],
) -> Result<usize, crate::EngineError> {
    if f.signal >= n_signals || !(f.offset.is_finite() && f.rate.is_finite() && f.t_ref.is_finite())
    {
        return Err(crate::EngineError::BadOption {
            what: "event signal index",
            value: f.signal as f64,
            allowed: "an index into the event signals, finite offset and rate",
        });
    }
    slots
        .iter()
        .position(Option::is_none)
        .ok_or(crate::EngineError::BadOption {
            what: "armed events",
            value: MAX_ARMED as f64,
            allowed: "fewer armed at once",
        })
}
