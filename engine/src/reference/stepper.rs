//! The reference path as a [`Stepper`]: what the exact path offers a driver, less
//! meters and fixed-interval samples.

use crate::circuit::Circuit;
use crate::error::EngineError;
use crate::event::{Sink, StepOutcome};
use crate::stepper::{forward_to_inherent, Handover, Stepper};
use crate::system::Observation;

use super::{ReferenceOptions, ReferenceRun};

impl ReferenceRun {
    /// Present value of event signal `k` (without offset or rate).
    pub fn event_signal(&self, k: usize) -> f64 {
        self.run.event_signal(k)
    }

    /// Replaces the dynamic states x (length nx) and settles the diodes.
    pub fn set_states(&mut self, x: &[f64]) -> Result<(), EngineError> {
        self.run.set_states(x)?;
        self.settle()
    }

    /// Where the run stands now.
    pub fn handover(&self) -> Handover {
        self.run.handover(self.time)
    }

    /// Continues from where another run of the same circuit stands: time, state and
    /// topology are taken over and the diodes settled; source breakpoints follow the
    /// new time; armed events stay as they are.
    pub fn take_over(&mut self, from: &Handover) -> Result<(), EngineError> {
        self.run.take_over(from, from.time)?;
        self.time = from.time;
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
        let now = self.run.topo.topology;
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

    forward_to_inherent!(ReferenceRun);

    fn meters(&self) -> Vec<f64> {
        Vec::new()
    }

    fn step_to(&mut self, until: f64, sink: &mut dyn Sink) -> Result<StepOutcome, EngineError> {
        self.step_with(until, sink)
    }
}
