//! The reference path as a [`Stepper`]: what the exact path offers a driver, less
//! meters and fixed-interval samples.

use nalgebra::DVector;

use crate::circuit::{Circuit, ElementId};
use crate::error::EngineError;
use crate::event::{EventFn, EventSlot, Sink, StepOutcome};
use crate::sim::source_waveform;
use crate::stepper::{check_handover, Handover, Stepper};
use crate::system::{Observation, System};
use crate::topology::Topology;

use super::{ReferenceOptions, ReferenceRun};

impl ReferenceRun {
    /// Present value of event signal `k` (without offset or rate).
    pub fn event_signal(&self, k: usize) -> f64 {
        self.topo.value(self.system.diode_count() + k, &self.z)
    }

    /// Replaces the dynamic states x (length nx) and settles the diodes.
    pub fn set_states(&mut self, x: &[f64]) -> Result<(), EngineError> {
        let nx = self.system.layout.nx();
        if x.len() != nx || x.iter().any(|v| !v.is_finite()) {
            return Err(EngineError::BadOption {
                what: "initial state length",
                value: x.len() as f64,
                allowed: "one finite value per state",
            });
        }
        self.z.rows_mut(0, nx).copy_from_slice(x);
        self.settle()
    }

    /// Where the run stands now.
    pub fn handover(&self) -> Handover {
        Handover {
            time: self.time,
            state: self.z.as_slice().to_vec(),
            topology: self.topo.topology,
        }
    }

    /// Continues from where another run of the same circuit stands: time, state and
    /// topology are taken over and the diodes settled; source breakpoints follow the
    /// new time; armed events stay as they are.
    pub fn take_over(&mut self, from: &Handover) -> Result<(), EngineError> {
        check_handover(from, self.z.len())?;
        self.time = from.time;
        self.z.as_mut_slice().copy_from_slice(&from.state);
        self.topo = self.system.topology(from.topology)?;
        for (k, src) in self.system.layout.sources.iter().enumerate() {
            self.breaks[k] = source_waveform(&self.system.circuit, *src)
                .segment(from.time)
                .until;
        }
        self.recent.clear();
        self.settle()
    }

    /// Sends the pending flagged sample (and the topology change before it).
    pub(super) fn flush(&mut self, sink: &mut dyn Sink) -> Result<(), EngineError> {
        if !self.pending_flagged {
            return Ok(());
        }
        self.pending_flagged = false;
        let time = self.time;
        let now = self.topo.topology;
        let listens = sink.listens();
        if now != self.reported && listens {
            sink.topology_change(time, self.reported, now)
                .map_err(|message| EngineError::Sink { time, message })?;
        }
        self.reported = now;
        if !listens {
            return Ok(());
        }
        for k in 0..self.values.len() {
            self.values[k] = self.probe(k);
        }
        sink.sample(time, &self.values, true)
            .map_err(|message| EngineError::Sink { time, message })
    }
}

impl Stepper for ReferenceRun {
    type Options = ReferenceOptions;

    fn build(
        circuit: Circuit,
        observation: Observation,
        options: ReferenceOptions,
    ) -> Result<Self, EngineError> {
        ReferenceRun::new(circuit, observation, options)
    }

    fn time(&self) -> f64 {
        ReferenceRun::time(self)
    }

    fn system(&self) -> &System {
        ReferenceRun::system(self)
    }

    fn state(&self) -> &DVector<f64> {
        ReferenceRun::state(self)
    }

    fn topology(&self) -> Topology {
        ReferenceRun::topology(self)
    }

    fn probe(&self, k: usize) -> f64 {
        ReferenceRun::probe(self, k)
    }

    fn event_signal(&self, k: usize) -> f64 {
        ReferenceRun::event_signal(self, k)
    }

    fn meters(&self) -> Vec<f64> {
        Vec::new()
    }

    fn set_gate(&mut self, switch: ElementId, on: bool) -> Result<(), EngineError> {
        ReferenceRun::set_gate(self, switch, on)
    }

    fn set_source(&mut self, source: ElementId, value: f64, slope: f64) -> Result<(), EngineError> {
        ReferenceRun::set_source(self, source, value, slope)
    }

    fn set_states(&mut self, x: &[f64]) -> Result<(), EngineError> {
        ReferenceRun::set_states(self, x)
    }

    fn arm(&mut self, f: EventFn) -> Result<EventSlot, EngineError> {
        ReferenceRun::arm(self, f)
    }

    fn disarm(&mut self, slot: EventSlot) {
        ReferenceRun::disarm(self, slot)
    }

    fn step_to(&mut self, until: f64, sink: &mut dyn Sink) -> Result<StepOutcome, EngineError> {
        self.step_with(until, sink)
    }

    fn handover(&self) -> Handover {
        ReferenceRun::handover(self)
    }

    fn take_over(&mut self, from: &Handover) -> Result<(), EngineError> {
        ReferenceRun::take_over(self, from)
    }
}
