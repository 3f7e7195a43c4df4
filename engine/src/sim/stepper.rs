//! The exact path as a [`Stepper`], and handing a run over to or from another path.

use crate::circuit::Circuit;
use crate::error::EngineError;
use crate::event::{Sink, StepOutcome, Stop, Turning};
use crate::stepper::{forward_to_inherent, Handover, Stepper};
use crate::system::Observation;

use super::{SimOptions, Simulation, StormRing};

impl Simulation {
    /// Where the run stands now.
    pub fn handover(&self) -> Handover {
        self.run.handover(self.time())
    }

    /// Continues from where another run of the same circuit stands (time rounded to
    /// the nearest tick): time, state and topology are taken over and the diodes
    /// settled; source breakpoints and the next output sample follow the new time;
    /// armed events and meters stay as they are.
    pub fn take_over(&mut self, from: &Handover) -> Result<(), EngineError> {
        let grid = self.run.system.grid;
        let tick = grid.tick(from.time);
        self.run.take_over(from, grid.time(tick))?;
        self.restart_sensitivity();
        self.tick = tick;
        self.refresh_next_break();
        self.sources_changed();
        self.next_sample = self
            .sample_every
            .map_or(0, |every| (self.tick / every + 1) * every);
        self.storm = StormRing::new(self.storm.ticks.len(), self.storm.window);
        self.pending_flagged = true;
        self.settle()
    }
}

impl Stepper for Simulation {
    type Options = SimOptions;

    fn build(
        circuit: Circuit,
        observation: Observation,
        options: SimOptions,
    ) -> Result<Self, EngineError> {
        Simulation::new(circuit, observation, options)
    }

    forward_to_inherent!(Simulation);

    fn meters(&self) -> Vec<f64> {
        Simulation::meters(self)
    }

    fn trace_probes(&mut self, probes: &[(usize, Turning)]) -> Result<(), EngineError> {
        Simulation::trace_probes(self, probes)
    }

    fn traces_every_step(&self) -> bool {
        true
    }

    fn step_to(&mut self, until: f64, sink: &mut dyn Sink) -> Result<StepOutcome, EngineError> {
        Simulation::step_to(self, until, sink)
    }

    fn advance(&mut self, until: f64, sink: &mut dyn Sink) -> Result<Stop, EngineError> {
        Simulation::advance(self, until, sink)
    }

    fn last_event_stamp(&self) -> Option<super::EventStamp> {
        Simulation::last_event_stamp(self)
    }

    fn delay_from(&mut self, stamp: super::EventStamp) {
        Simulation::delay_from(self, stamp)
    }
}
