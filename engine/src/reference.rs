//! The second, independent integration path: the same piecewise-linear system
//! ż = M z (per topology, from the same nodal analysis) integrated by the explicit
//! Dormand–Prince 8(5,3) Runge–Kutta method of the `ode_solvers` crate (Hairer,
//! Nørsett & Wanner, *Solving Ordinary Differential Equations I*, 2nd ed., II.5)
//! instead of the matrix exponential. Today it is a cross-check of the exact path (a
//! different method with its own error control); later, it is the path for elements
//! that are not piecewise linear, whose right-hand side can be any function of z.
//!
//! Event location: the crate's dense output is only sampled on a fixed output grid and
//! its interpolation coefficients are private, so it cannot be root-found. Each span
//! between events is integrated with sparse output; the crate's per-step hook
//! (`solout`) evaluates every event function after each accepted step and stops the
//! run on the first step across which one went from ≤ 0 to > 0. The crossing is then
//! bisected in time, re-integrating from the bracket's lower end to its midpoint with
//! the same tolerances, until the bracket is no wider than
//! [`ReferenceOptions::event_tolerance`]. The event is applied at the upper end (the
//! first point after the crossing, as the exact path takes the first tick after it),
//! so every state used is as accurate as the integrator and the event time is within
//! `event_tolerance` of the integrated trajectory's crossing. Steps are capped at
//! [`ReferenceOptions::max_step`] so a function that crosses and re-crosses within a
//! step is not missed. After each event the diodes are settled by the problem's rule
//! ([`crate::run`]: which diodes conduct at a state is part of the problem, not of a
//! method), applied to this path's own state.
//!
//! Meters, fixed-interval samples and allocation-free stepping are not offered: this is
//! a reference, not a production stepper (the integrator allocates on every stage).
//! Sinks passed through [`crate::Stepper::step_to`] hear every topology change and get
//! one flagged sample per event, gate or source change.

use std::collections::VecDeque;

use nalgebra::DVector;
use ode_solvers::dop_shared::IntegrationError;
use ode_solvers::{Dop853, OutputType};

use crate::circuit::{Circuit, ElementId};
use crate::error::EngineError;
use crate::event::{
    free_slot, Direction, EventFn, EventSlot, NullSink, Sink, StepOutcome, Stop, MAX_ARMED,
};
use crate::ladder::TimeGrid;
use crate::run::RunState;
use crate::sim::StormGuard;
use crate::system::{Observation, System, TopologyData};
use crate::topology::Topology;

mod stepper;

/// Options of the reference integrator.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ReferenceOptions {
    /// Relative tolerance of the Dop853 step control (dimensionless).
    pub rtol: f64,
    /// Absolute tolerance of the Dop853 step control, in the state's own units
    /// (amperes and volts).
    pub atol: f64,
    /// Longest integrator step, seconds; also the finest re-crossing that is seen.
    pub max_step: f64,
    /// Width of the time bracket an event is located to, seconds.
    pub event_tolerance: f64,
    /// Most integrator steps in one span between events.
    pub max_steps: u32,
    /// Storm guard, as on the exact path.
    pub storm: StormGuard,
    /// Most topologies kept in the cache.
    pub cache_limit: usize,
    /// Whether the integrator's stiffness test may stop a run (an explicit method on a
    /// stiff topology crawls at its stability limit; off, it crawls to the end).
    pub stop_when_stiff: bool,
}

impl ReferenceOptions {
    /// Options for a circuit switching with period `period` seconds: rtol 1e-10,
    /// atol 1e-12, steps of at most 1/16 period, events bracketed to 1e-12 period,
    /// and the exact path's storm guard (500 events in 1 % of a period).
    pub fn for_period(period: f64) -> Self {
        ReferenceOptions {
            rtol: 1e-10,
            atol: 1e-12,
            max_step: period / 16.0,
            event_tolerance: 1e-12 * period,
            max_steps: 100_000,
            storm: StormGuard {
                max_events: 500,
                window: period / 100.0,
            },
            cache_limit: 256,
            stop_when_stiff: true,
        }
    }

    fn validate(&self) -> Result<(), EngineError> {
        let o = self;
        let positive = [
            ("rtol", o.rtol),
            ("atol", o.atol),
            ("max_step", o.max_step),
            ("event_tolerance", o.event_tolerance),
            ("storm.window", o.storm.window),
            ("max_steps", f64::from(o.max_steps)),
            ("storm.max_events", o.storm.max_events as f64),
        ];
        match positive.iter().find(|(_, v)| !(v.is_finite() && *v > 0.0)) {
            Some(&(what, value)) => Err(EngineError::BadOption {
                what,
                value,
                allowed: "a positive finite number",
            }),
            None => Ok(()),
        }
    }
}

/// A run of the reference path. Mirrors [`crate::Simulation`]: the caller advances
/// time, changes gates and sources between advances, and reads probes.
pub struct ReferenceRun {
    /// The problem, state, topology and breakpoint schedule, shared with the exact
    /// path.
    run: RunState,
    options: ReferenceOptions,
    time: f64,
    armed: [Option<EventFn>; MAX_ARMED],
    recent: VecDeque<f64>,
    /// Event values at the previous and present accepted step, for the watcher.
    watch_prev: Vec<f64>,
    watch_now: Vec<f64>,
    /// A flagged sample is due (the state or topology changed outside integration).
    pending_flagged: bool,
    /// Topology last reported to a sink.
    reported: Topology,
    /// Probe values handed to a sink.
    values: Vec<f64>,
}

/// End of one integrated span: time and state reached and, when an event function
/// fired on the last step, the time and state at that step's start.
struct Span {
    t: f64,
    z: DVector<f64>,
    fired_from: Option<(f64, DVector<f64>)>,
}

impl ReferenceRun {
    /// Checks the circuit, sets initial values (as [`crate::Simulation::new`] does)
    /// and settles the diodes at t = 0.
    pub fn new(
        circuit: Circuit,
        observation: Observation,
        options: ReferenceOptions,
    ) -> Result<Self, EngineError> {
        options.validate()?;
        // A one-rung grid: the system's cached exponentials are not used here, so
        // build as few as possible.
        let grid = TimeGrid::new(options.max_step, options.max_step)?;
        let system = System::new(circuit, observation, grid, options.cache_limit)?;
        let n_events = system.diode_count() + MAX_ARMED;
        let n_probes = system.observation.probes.len();
        let mut run = ReferenceRun {
            run: RunState::new(system, 0)?,
            options,
            time: 0.0,
            armed: [None; MAX_ARMED],
            recent: VecDeque::with_capacity(options.storm.max_events + 1),
            watch_prev: vec![0.0; n_events],
            watch_now: vec![0.0; n_events],
            pending_flagged: false,
            reported: Topology::default(),
            values: vec![0.0; n_probes],
        };
        run.settle()?;
        Ok(run)
    }

    /// Present time, seconds.
    pub fn time(&self) -> f64 {
        self.time
    }

    /// The problem being integrated.
    pub fn system(&self) -> &System {
        &self.run.system
    }

    /// Augmented state z = [x; 1; w; s] (see [`crate::Layout`]).
    pub fn state(&self) -> &DVector<f64> {
        &self.run.z
    }

    /// Present topology.
    pub fn topology(&self) -> Topology {
        self.run.topo.topology
    }

    /// Present value of probe `k`, in the probe's own units.
    pub fn probe(&self, k: usize) -> f64 {
        self.run.probe(k)
    }

    /// Turns a switch on or off now, then settles the diodes.
    pub fn set_gate(&mut self, switch: ElementId, on: bool) -> Result<(), EngineError> {
        if self.run.set_gate(switch, on)? {
            self.settle()?;
        }
        Ok(())
    }

    /// Sets an independent source to `value` with `slope` per second from now on
    /// (until its own waveform's next breakpoint), then settles the diodes.
    pub fn set_source(
        &mut self,
        source: ElementId,
        value: f64,
        slope: f64,
    ) -> Result<(), EngineError> {
        self.run.set_source(source, value, slope)?;
        self.settle()
    }

    /// Arms an event; returns its slot.
    pub fn arm(&mut self, f: EventFn) -> Result<EventSlot, EngineError> {
        let slot = free_slot(
            &f,
            self.run.system.observation.event_signals.len(),
            &self.armed,
        )?;
        self.armed[slot] = Some(f);
        Ok(EventSlot(slot as u8))
    }

    /// Disarms an event.
    pub fn disarm(&mut self, slot: EventSlot) {
        if let Some(a) = self.armed.get_mut(usize::from(slot.0)) {
            *a = None;
        }
    }

    /// Runs until `until` seconds or until an armed event crosses.
    pub fn advance(&mut self, until: f64) -> Result<Stop, EngineError> {
        loop {
            match self.step_to(until)? {
                StepOutcome::StopTime => return Ok(Stop::Reached),
                StepOutcome::Event { time, armed, .. } if armed != 0 => {
                    return Ok(Stop::Armed { time, mask: armed })
                }
                _ => {}
            }
        }
    }

    /// Integrates towards `until` seconds and stops at the first event (diode or
    /// armed) or at `until`. Never returns [`StepOutcome::Internal`].
    pub fn step_to(&mut self, until: f64) -> Result<StepOutcome, EngineError> {
        self.step_with(until, &mut NullSink)
    }

    /// As [`ReferenceRun::step_to`], telling `sink` of topology changes and sending it
    /// a flagged sample after each event, gate or source change.
    fn step_with(&mut self, until: f64, sink: &mut dyn Sink) -> Result<StepOutcome, EngineError> {
        self.flush(sink)?;
        while self.time < until {
            let next_break =
                (self.run.breaks.iter().flatten()).fold(f64::INFINITY, |a, &b| a.min(b));
            let target = until.min(next_break);
            let span = self.integrate(self.time, &self.run.z.clone(), target, true)?;
            if let Some((t_lo, z_lo)) = span.fired_from {
                let outcome = self.locate(t_lo, z_lo, span.t, span.z)?;
                self.flush(sink)?;
                return Ok(outcome);
            }
            (self.time, self.run.z) = (target, span.z);
            if target == next_break {
                self.apply_breakpoints()?;
            }
        }
        self.flush(sink)?;
        Ok(StepOutcome::StopTime)
    }

    /// Bisects a bracketed crossing down to `event_tolerance`, applies the event at
    /// the bracket's upper end and settles the diodes.
    fn locate(
        &mut self,
        mut a: f64,
        mut z_a: DVector<f64>,
        mut b: f64,
        mut z_b: DVector<f64>,
    ) -> Result<StepOutcome, EngineError> {
        let n = self.watch_prev.len();
        let (mut g_lo, mut g_hi, mut g_mid) = (vec![0.0; n], vec![0.0; n], vec![0.0; n]);
        let nd = self.run.system.diode_count();
        eval_events(&self.run.topo, &self.armed, nd, a, &z_a, &mut g_lo);
        eval_events(&self.run.topo, &self.armed, nd, b, &z_b, &mut g_hi);
        loop {
            let mid = a + 0.5 * (b - a);
            // Stop at the tolerance, or when the bracket is down to adjacent floats.
            if b - a <= self.options.event_tolerance || mid <= a || mid >= b {
                break;
            }
            // Unwatched, the integration always reaches `mid`.
            let z_mid = self.integrate(a, &z_a, mid, false)?.z;
            eval_events(&self.run.topo, &self.armed, nd, mid, &z_mid, &mut g_mid);
            if fired(&g_lo, &g_mid) {
                (b, z_b) = (mid, z_mid);
                std::mem::swap(&mut g_hi, &mut g_mid);
            } else {
                (a, z_a) = (mid, z_mid);
                std::mem::swap(&mut g_lo, &mut g_mid);
            }
        }
        let slots = g_lo[nd..].iter().zip(&g_hi[nd..]).enumerate();
        let armed = slots.fold(0u64, |m, (k, (&lo, &hi))| {
            m | u64::from(lo <= 0.0 && hi > 0.0) << k
        });
        (self.time, self.run.z) = (b, z_b);
        self.settle()?;
        self.record_event()?;
        Ok(StepOutcome::Event {
            time: b,
            armed,
            diode: self.run.flipped.first().copied(),
        })
    }

    /// Integrates ż = M z of the present topology from (t0, z0) to t1. With `watch`,
    /// stops after the first accepted step across which an event function fires.
    fn integrate(
        &mut self,
        t0: f64,
        z0: &DVector<f64>,
        t1: f64,
        watch: bool,
    ) -> Result<Span, EngineError> {
        let span = t1 - t0;
        if span <= 16.0 * f64::EPSILON * t0.abs().max(t1.abs()) {
            // Too short for the integrator's step-size floor (0.1·h > ε·|t|); one
            // Euler step is exact to O(span²), far below any tolerance here.
            let z = z0 + &self.run.topo.m * z0 * span;
            let fired_from = None;
            return Ok(Span {
                t: t1,
                z,
                fired_from,
            });
        }
        let mut watcher = Watcher {
            topo: &self.run.topo,
            armed: &self.armed,
            nd: self.run.system.diode_count(),
            g_prev: std::mem::take(&mut self.watch_prev),
            g_now: std::mem::take(&mut self.watch_now),
            watch,
            fired: false,
        };
        let (topo, armed, nd) = (watcher.topo, watcher.armed, watcher.nd);
        eval_events(topo, armed, nd, t0, z0, &mut watcher.g_prev);
        let o = &self.options;
        let mut solver = Dop853::from_param(
            &mut watcher,
            t0,
            t1,
            span,
            z0.clone(),
            o.rtol,
            o.atol,
            0.9,   // safety factor (Hairer's default)
            0.0,   // PI controller β (Hairer's default for DOP853)
            0.333, // smallest step ratio
            6.0,   // largest step ratio
            o.max_step.min(span),
            0.0, // initial step: chosen by the integrator
            o.max_steps,
            // Stiffness test every 1000 steps (Hairer's default), or never.
            if o.stop_when_stiff { 1000 } else { u32::MAX },
            OutputType::Sparse,
        );
        let result = solver.integrate();
        // Only the last step can hold a crossing: the watcher stops at the first.
        let (ts, zs) = (solver.x_out(), solver.y_out());
        let n = ts.len();
        let end = ts.last().copied().zip(zs.last().cloned());
        let start = (n >= 2).then(|| (ts[n - 2], zs[n - 2].clone()));
        drop(solver);
        self.watch_prev = std::mem::take(&mut watcher.g_prev);
        self.watch_now = std::mem::take(&mut watcher.g_now);
        result.map_err(|e| integrator_error(e, t0))?;
        match end {
            Some((t, z)) if z.iter().all(|v| v.is_finite()) => Ok(Span {
                t,
                z,
                fired_from: start.filter(|_| watcher.fired),
            }),
            _ => Err(EngineError::ReferenceIntegrator {
                time: t0,
                reason: "state became non-finite".into(),
            }),
        }
    }

    fn apply_breakpoints(&mut self) -> Result<(), EngineError> {
        let time = self.time;
        self.run.apply_breakpoints(|tb| tb <= time);
        self.settle()
    }

    fn settle(&mut self) -> Result<(), EngineError> {
        self.pending_flagged = true;
        self.run.settle(self.time, &mut self.watch_now)
    }

    /// Storm guard: `max_events` events within `window` seconds is an error.
    fn record_event(&mut self) -> Result<(), EngineError> {
        let guard = self.options.storm;
        self.recent.push_back(self.time);
        if self.recent.len() > guard.max_events {
            self.recent.pop_front();
        }
        let oldest = self.recent.front().copied().unwrap_or(self.time);
        if self.recent.len() < guard.max_events || self.time - oldest >= guard.window {
            return Ok(());
        }
        let c = &self.run.system.circuit;
        let names = self
            .run
            .flipped
            .iter()
            .map(|e| c.elements[e.0].name.clone());
        Err(EngineError::EventStorm {
            time: self.time,
            count: guard.max_events,
            window: guard.window,
            topology: self.run.describe_topology(),
            elements: names.chain(["(armed events)".to_string()]).collect(),
        })
    }
}

/// The right-hand side and per-step event watch handed to the integrator.
struct Watcher<'a> {
    topo: &'a TopologyData,
    armed: &'a [Option<EventFn>],
    nd: usize,
    g_prev: Vec<f64>,
    g_now: Vec<f64>,
    watch: bool,
    fired: bool,
}

impl ode_solvers::System<f64, DVector<f64>> for &mut Watcher<'_> {
    fn system(&self, _t: f64, z: &DVector<f64>, dz: &mut DVector<f64>) {
        self.topo.m.mul_to(z, dz);
    }

    fn solout(&mut self, t: f64, z: &DVector<f64>, _dz: &DVector<f64>) -> bool {
        if !self.watch {
            return false;
        }
        eval_events(self.topo, self.armed, self.nd, t, z, &mut self.g_now);
        self.fired = fired(&self.g_prev, &self.g_now);
        std::mem::swap(&mut self.g_prev, &mut self.g_now);
        self.fired
    }
}

/// Event functions at (t, z) into `g`: diode rows, then one entry per armed slot
/// (−∞ when empty), signed so every function fires rising through zero.
fn eval_events(
    topo: &TopologyData,
    armed: &[Option<EventFn>],
    nd: usize,
    t: f64,
    z: &DVector<f64>,
    g: &mut [f64],
) {
    for (r, gr) in g.iter_mut().enumerate().take(nd) {
        *gr = topo.value(r, z);
    }
    for (k, a) in armed.iter().enumerate() {
        g[nd + k] = match a {
            Some(f) => {
                let v = topo.value(nd + f.signal, z) + f.offset + f.rate * (t - f.t_ref);
                match f.direction {
                    Direction::Rising => v,
                    Direction::Falling => -v,
                }
            }
            None => f64::NEG_INFINITY,
        };
    }
}

/// Whether any function went from ≤ 0 to > 0.
fn fired(lo: &[f64], hi: &[f64]) -> bool {
    lo.iter().zip(hi).any(|(&a, &b)| a <= 0.0 && b > 0.0)
}

fn integrator_error(e: IntegrationError, t0: f64) -> EngineError {
    let time = match e {
        IntegrationError::MaxNumStepReached { x, .. }
        | IntegrationError::StepSizeUnderflow { x }
        | IntegrationError::StiffnessDetected { x } => x,
    };
    EngineError::ReferenceIntegrator {
        time: if time.is_finite() { time } else { t0 },
        reason: e.to_string(),
    }
}
