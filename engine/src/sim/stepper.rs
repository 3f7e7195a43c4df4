//! The exact path as a [`Stepper`], and handing a run over to or from another path.

use nalgebra::DVector;

use crate::circuit::{Circuit, ElementId};
use crate::error::EngineError;
use crate::event::{EventFn, EventSlot, Sink, StepOutcome, Stop, Turning};
use crate::stepper::{check_handover, Handover, Stepper};
use crate::system::{Observation, System};
use crate::topology::Topology;

use super::{source_waveform, SimOptions, Simulation, StormRing};

impl Simulation {
    /// Where the run stands now.
    pub fn handover(&self) -> Handover {
        Handover {
            time: self.time(),
            state: self.z.as_slice().to_vec(),
            topology: self.topo.topology,
        }
    }

    /// Continues from where another run of the same circuit stands (time rounded to
    /// the nearest tick): time, state and topology are taken over and the diodes
    /// settled; source breakpoints and the next output sample follow the new time;
    /// armed events and meters stay as they are.
    pub fn take_over(&mut self, from: &Handover) -> Result<(), EngineError> {
        check_handover(from, self.z.len())?;
        self.tick = self.system.grid.tick(from.time);
        self.z.as_mut_slice().copy_from_slice(&from.state);
        self.topo = self.system.topology(from.topology)?;
        let time = self.time();
        for (k, src) in self.system.layout.sources.iter().enumerate() {
            self.breaks[k] = source_waveform(&self.system.circuit, *src)
                .segment(time)
                .until;
        }
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

    #[inline]
    fn time(&self) -> f64 {
        Simulation::time(self)
    }

    #[inline]
    fn system(&self) -> &System {
        Simulation::system(self)
    }

    #[inline]
    fn state(&self) -> &DVector<f64> {
        Simulation::state(self)
    }

    #[inline]
    fn topology(&self) -> Topology {
        Simulation::topology(self)
    }

    #[inline]
    fn probe(&self, k: usize) -> f64 {
        Simulation::probe(self, k)
    }

    #[inline]
    fn event_signal(&self, k: usize) -> f64 {
        Simulation::event_signal(self, k)
    }

    #[inline]
    fn meters(&self) -> Vec<f64> {
        Simulation::meters(self)
    }

    #[inline]
    fn set_gate(&mut self, switch: ElementId, on: bool) -> Result<(), EngineError> {
        Simulation::set_gate(self, switch, on)
    }

    fn set_source(&mut self, source: ElementId, value: f64, slope: f64) -> Result<(), EngineError> {
        Simulation::set_source(self, source, value, slope)
    }

    fn set_states(&mut self, x: &[f64]) -> Result<(), EngineError> {
        Simulation::set_states(self, x)
    }

    fn arm(&mut self, f: EventFn) -> Result<EventSlot, EngineError> {
        Simulation::arm(self, f)
    }

    #[inline]
    fn disarm(&mut self, slot: EventSlot) {
        Simulation::disarm(self, slot)
    }

    #[inline]
    fn trace_probes(&mut self, probes: &[(usize, Turning)]) -> Result<(), EngineError> {
        Simulation::trace_probes(self, probes)
    }

    fn step_to(&mut self, until: f64, sink: &mut dyn Sink) -> Result<StepOutcome, EngineError> {
        Simulation::step_to(self, until, sink)
    }

    fn advance(&mut self, until: f64, sink: &mut dyn Sink) -> Result<Stop, EngineError> {
        Simulation::advance(self, until, sink)
    }

    fn handover(&self) -> Handover {
        Simulation::handover(self)
    }

    fn take_over(&mut self, from: &Handover) -> Result<(), EngineError> {
        Simulation::take_over(self, from)
    }
}
