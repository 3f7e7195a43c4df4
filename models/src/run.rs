//! A converter under simulation: the engine run plus what a converter adds on top —
//! gate commands by role, the saturation knee, and the cycle watch.

use stepflux_engine::{
    Direction, ElementId, EventFn, EventSlot, Handover, Meter, Observation, Quantity, Signal,
    SimOptions, Simulation, Sink, StepOutcome, Stepper, Stop, Topology, TracePoint, Turning,
};

use crate::cycles::{CycleSink, CycleWatch, WatchPoints};
use crate::error::ModelError;
use crate::template::{Converter, KeyElements, Probe, SaturationBranch};

/// Event-signal index of the magnetising current (see [`ConverterRun::new`]).
const MAG_SIGNAL: usize = 0;

/// Saturation switches and the events that toggle them.
struct Knee {
    branch: SaturationBranch,
    positive_closed: bool,
    negative_closed: bool,
    slots: [Option<EventSlot>; 2],
}

/// A change applied at a set time while the run goes through it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Action {
    /// Set an independent source to `value` with `slope` per second.
    Source {
        /// The source.
        element: ElementId,
        /// Value from now, SI units.
        value: f64,
        /// Slope per second from now.
        slope: f64,
    },
    /// Turn a switch on or off.
    Gate {
        /// The switch.
        switch: ElementId,
        /// On or off.
        on: bool,
    },
}

/// Where a [`ConverterRun`] stands, kept to return to it later (the steady-state
/// search starts many trial periods from the same instant).
#[derive(Clone, Debug)]
pub struct RunSnapshot {
    /// Time, augmented state and topology.
    pub handover: Handover,
    watch: CycleWatch,
    schedule: Vec<(f64, Action)>,
    knee: Option<(bool, bool)>,
}

/// A converter being simulated, on the exact path unless another [`Stepper`] is named.
pub struct ConverterRun<S = Simulation> {
    /// The engine simulation.
    pub sim: S,
    /// Elements of interest.
    pub key: KeyElements,
    probes: Vec<Probe>,
    watch: CycleWatch,
    knee: Option<Knee>,
    /// Pending actions, latest first (popped from the end).
    schedule: Vec<(f64, Action)>,
}

fn required(conv: &Converter, name: &str) -> Result<usize, ModelError> {
    conv.probe_index(name)
        .ok_or_else(|| ModelError::Infeasible(format!("template has no '{name}' probe")))
}

impl ConverterRun<Simulation> {
    /// Prepares a run of `conv`. Extra event signals (for a controller) follow the
    /// magnetising current, which is event signal 0.
    pub fn new(
        conv: &Converter,
        options: SimOptions,
        extra_events: Vec<Signal>,
    ) -> Result<Self, ModelError> {
        Self::with_meters(conv, options, extra_events, Vec::new())
    }

    /// As [`ConverterRun::new`], with engine meters (exact energy integrals, read with
    /// `sim.meters()` in the order given).
    pub fn with_meters(
        conv: &Converter,
        options: SimOptions,
        extra_events: Vec<Signal>,
        meters: Vec<Meter>,
    ) -> Result<Self, ModelError> {
        Self::with_stepper(conv, options, extra_events, meters)
    }
}

impl<S: Stepper> ConverterRun<S> {
    /// As [`ConverterRun::with_meters`], on the stepper `S` built with `options`.
    pub fn with_stepper(
        conv: &Converter,
        options: S::Options,
        extra_events: Vec<Signal>,
        meters: Vec<Meter>,
    ) -> Result<Self, ModelError> {
        let mut event_signals = vec![Signal::of(Quantity::Current(conv.key.magnetising))];
        event_signals.extend(extra_events);
        let observation = Observation {
            probes: conv
                .probes
                .iter()
                .map(|p| (p.name.clone(), p.signal.clone()))
                .collect(),
            event_signals,
            meters,
        };
        let mut sim = S::build(conv.circuit.clone(), observation, options)?;
        let points = WatchPoints::new(
            &sim,
            required(conv, "mag.i")?,
            required(conv, "drain.v")?,
            required(conv, "core.b")?,
            &conv.key.reset_diodes,
        );
        let watch = CycleWatch::new(points);
        sim.trace_probes(&watch.probes())?;
        let mut run = ConverterRun {
            sim,
            key: conv.key.clone(),
            probes: conv.probes.clone(),
            watch,
            knee: conv.key.saturation.map(|branch| Knee {
                branch,
                positive_closed: false,
                negative_closed: false,
                slots: [None, None],
            }),
            schedule: Vec::new(),
        };
        run.arm_knee()?;
        Ok(run)
    }

    /// Continues from where `other` (a run of the same converter, on any stepper)
    /// stands: its time, state, topology, open cycle record, saturation-knee state and
    /// pending actions.
    pub fn continue_from<T: Stepper>(&mut self, other: &ConverterRun<T>) -> Result<(), ModelError> {
        self.sim.take_over(&other.sim.handover())?;
        self.watch = other.watch.clone();
        self.schedule = other.schedule.clone();
        if let (Some(knee), Some(theirs)) = (self.knee.as_mut(), other.knee.as_ref()) {
            knee.positive_closed = theirs.positive_closed;
            knee.negative_closed = theirs.negative_closed;
        }
        self.arm_knee()
    }

    /// Where the run stands now (time, state, topology, open cycle record, pending
    /// actions, saturation-knee state).
    pub fn snapshot(&self) -> RunSnapshot {
        RunSnapshot {
            handover: self.sim.handover(),
            watch: self.watch.clone(),
            schedule: self.schedule.clone(),
            knee: self
                .knee
                .as_ref()
                .map(|k| (k.positive_closed, k.negative_closed)),
        }
    }

    /// Returns to `at` (a snapshot of this run) with the dynamic states replaced by
    /// `x` (length nx), then settles the diodes. Armed events other than the knee's and
    /// the meters are left as they are: meters keep integrating across a return, so
    /// read energies as differences over a stretch that has no return inside it.
    pub fn restore(&mut self, at: &RunSnapshot, x: &[f64]) -> Result<(), ModelError> {
        let mut handover = at.handover.clone();
        let nx = self.sim.system().layout().nx();
        if x.len() != nx {
            return Err(ModelError::Infeasible(format!(
                "restoring a run: {} state values given, the circuit has {nx}",
                x.len()
            )));
        }
        handover.state[..nx].copy_from_slice(x);
        self.sim.take_over(&handover)?;
        self.watch = at.watch.clone();
        self.schedule = at.schedule.clone();
        if let (Some(knee), Some((p, n))) = (self.knee.as_mut(), at.knee) {
            knee.positive_closed = p;
            knee.negative_closed = n;
        }
        self.arm_knee()
    }

    /// The probes, in sample order.
    pub fn probes(&self) -> &[Probe] {
        &self.probes
    }

    /// Present value of a probe by name.
    pub fn probe(&self, name: &str) -> Option<f64> {
        self.probes
            .iter()
            .position(|p| p.name == name)
            .map(|k| self.sim.probe(k))
    }

    /// Turns the main switch(es) on or off.
    pub fn set_main(&mut self, on: bool) -> Result<(), ModelError> {
        for &s in &self.key.main_switches {
            self.sim.set_gate(s, on)?;
        }
        Ok(())
    }

    /// Turns the complementary switch on or off (no-op without one).
    pub fn set_aux(&mut self, on: bool) -> Result<(), ModelError> {
        match self.key.aux_switch {
            Some(s) => Ok(self.sim.set_gate(s, on)?),
            None => Ok(()),
        }
    }

    /// Opens a new cycle record at a turn-on.
    pub fn start_cycle(&mut self, period: f64, duty: f64, cycles: &mut dyn CycleSink) {
        self.watch.turn_on(&self.sim, period, duty, cycles);
    }

    /// Closes the last cycle record (end of run).
    pub fn finish(&mut self, cycles: &mut dyn CycleSink) {
        self.watch.close(&self.sim, cycles);
    }

    /// Queues actions to apply when the run passes their times (order of equal times
    /// is kept).
    pub fn schedule(&mut self, actions: impl IntoIterator<Item = (f64, Action)>) {
        // Kept latest first so the next action pops off the end; a stable ascending
        // sort then a reversal keeps equal times in the order given.
        self.schedule.reverse();
        self.schedule.extend(actions);
        self.schedule.sort_by(|a, b| a.0.total_cmp(&b.0));
        self.schedule.reverse();
    }

    /// Records the actual duty of the open cycle.
    pub fn set_cycle_duty(&mut self, duty: f64) {
        self.watch.set_duty(duty);
    }

    /// Runs to `t` seconds, applying scheduled actions on the way, handling the
    /// saturation knee and feeding the cycle watch; returns early with the mask when an
    /// armed event other than the knee's fires.
    pub fn advance(&mut self, t: f64, sink: &mut dyn Sink) -> Result<Stop, ModelError> {
        while let Some(&(when, _)) = self.schedule.last() {
            if when > t {
                break;
            }
            if let Stop::Armed { time, mask } = self.advance_plain(when, sink)? {
                return Ok(Stop::Armed { time, mask });
            }
            // Every action due now before the run steps on: between two of them (a
            // load step's old branch off, the new one not yet on) lies no state the
            // circuit passes through, and stepping would show it to the sinks.
            let grid = *self.sim.system().grid();
            let now = grid.tick(self.sim.time());
            while let Some(&(due, action)) = self.schedule.last() {
                if grid.tick(due) > now {
                    break;
                }
                self.schedule.pop();
                self.apply(action)?;
            }
        }
        self.advance_plain(t, sink)
    }

    fn apply(&mut self, action: Action) -> Result<(), ModelError> {
        match action {
            Action::Source {
                element,
                value,
                slope,
            } => self.sim.set_source(element, value, slope)?,
            Action::Gate { switch, on } => self.sim.set_gate(switch, on)?,
        }
        self.watch.observe(&self.sim);
        Ok(())
    }

    /// Also traces probes `extra` (by index) besides those the cycle watch reads, for
    /// measurements that want the exact solution's extrema.
    pub fn trace_also(&mut self, extra: &[(usize, Turning)]) -> Result<(), ModelError> {
        let mut all = self.watch.probes().to_vec();
        all.extend_from_slice(extra);
        Ok(self.sim.trace_probes(&all)?)
    }

    fn advance_plain(&mut self, t: f64, sink: &mut dyn Sink) -> Result<Stop, ModelError> {
        loop {
            let mut watched = Watched {
                inner: &mut *sink,
                watch: &mut self.watch,
            };
            let outcome = self.sim.step_to(t, &mut watched)?;
            if !self.sim.traces_every_step() {
                self.watch.observe(&self.sim);
            }
            match outcome {
                StepOutcome::StopTime => return Ok(Stop::Reached),
                StepOutcome::Event { time, armed, .. } if armed != 0 => {
                    let rest = self.on_knee(armed)?;
                    if rest != 0 {
                        return Ok(Stop::Armed { time, mask: rest });
                    }
                }
                _ => {}
            }
        }
    }

    /// Toggles saturation switches whose event fired; returns the other bits.
    fn on_knee(&mut self, mask: u64) -> Result<u64, ModelError> {
        let Some(knee) = self.knee.as_mut() else {
            return Ok(mask);
        };
        let mut rest = mask;
        for (k, slot) in knee.slots.iter().enumerate() {
            let Some(slot) = slot else { continue };
            let bit = 1u64 << slot.0;
            if mask & bit == 0 {
                continue;
            }
            rest &= !bit;
            let (switch, closed) = if k == 0 {
                knee.positive_closed = !knee.positive_closed;
                (knee.branch.positive, knee.positive_closed)
            } else {
                knee.negative_closed = !knee.negative_closed;
                (knee.branch.negative, knee.negative_closed)
            };
            self.sim.set_gate(switch, closed)?;
        }
        if rest != mask {
            self.arm_knee()?;
        }
        Ok(rest)
    }

    /// Arms the two knee crossings that can happen next: past ±knee outward while a
    /// branch is open, back through ±knee while it is closed.
    fn arm_knee(&mut self) -> Result<(), ModelError> {
        let Some(knee) = self.knee.as_mut() else {
            return Ok(());
        };
        for slot in knee.slots.iter_mut().flatten() {
            self.sim.disarm(*slot);
        }
        let i_k = knee.branch.knee;
        let event = |offset: f64, direction| EventFn {
            signal: MAG_SIGNAL,
            offset,
            rate: 0.0,
            t_ref: 0.0,
            direction,
        };
        let pos = if knee.positive_closed {
            Direction::Falling
        } else {
            Direction::Rising
        };
        let neg = if knee.negative_closed {
            Direction::Rising
        } else {
            Direction::Falling
        };
        knee.slots = [
            Some(self.sim.arm(event(-i_k, pos))?),
            Some(self.sim.arm(event(i_k, neg))?),
        ];
        Ok(())
    }
}

/// The run's sink seen through the cycle watch: trace points update the open cycle
/// record, then everything goes on to the caller's sink unchanged.
struct Watched<'a> {
    inner: &'a mut dyn Sink,
    watch: &'a mut CycleWatch,
}

impl Sink for Watched<'_> {
    fn sample(&mut self, time: f64, values: &[f64], at_event: bool) -> Result<(), String> {
        self.inner.sample(time, values, at_event)
    }

    fn topology_change(
        &mut self,
        time: f64,
        before: Topology,
        after: Topology,
    ) -> Result<(), String> {
        self.inner.topology_change(time, before, after)
    }

    fn listens(&self) -> bool {
        self.inner.listens()
    }

    fn trace(&mut self, point: &TracePoint<'_>) -> Result<(), String> {
        self.watch.trace(point);
        if self.inner.traces() {
            self.inner.trace(point)
        } else {
            Ok(())
        }
    }

    fn traces(&self) -> bool {
        true
    }
}
