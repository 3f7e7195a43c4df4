//! What both stepping paths share, apart from how they step: the problem (the
//! [`System`]), where a run stands (augmented state z and topology), the schedule of
//! the sources' waveform breakpoints, and the controls a driver uses between steps
//! (gates, sources, states, hand-over). The exact path ([`crate::Simulation`]) and the
//! reference path ([`crate::reference::ReferenceRun`]) each hold one [`RunState`] and
//! add only their own time keeping, integration and event location.
//!
//! Diode settling (`settle.rs`) lives here too: it is part of the problem, not of a
//! method. Which diodes conduct at a given state is a complementarity condition of the
//! piecewise-linear circuit, decided from switching functions that are the nodal
//! analysis's resistive solution at that instant (the same rows for every path); no
//! integration, step size or tolerance enters it. The paths differ in the state they
//! hand it (the exponential's or Dop853's), so the cross-check still compares two
//! independent integrations and event locations.

use std::sync::Arc;

use nalgebra::DVector;

use crate::circuit::{Circuit, ElementId, ElementKind};
use crate::error::EngineError;
use crate::stepper::{check_handover, Handover};
use crate::system::{System, TopologyData};
use crate::topology::Topology;
use crate::waveform::Waveform;

mod settle;
#[cfg(test)]
mod tests;
#[cfg(test)]
use crate::{ladder::TimeGrid, system::Observation};

pub(crate) use settle::settle_diodes;

/// The problem, where the run stands, and the breakpoint schedule.
pub(crate) struct RunState {
    pub system: System,
    /// Augmented state z = [x; 1; w; s] (see [`crate::Layout`]).
    pub z: DVector<f64>,
    pub topo: Arc<TopologyData>,
    /// Per source: next breakpoint time (seconds) of its waveform.
    pub breaks: Vec<Option<f64>>,
    /// Settling's work space: topologies visited, diodes flipped (in order).
    pub visited: Vec<Topology>,
    pub flipped: Vec<ElementId>,
}

impl RunState {
    /// Initial values at t = 0: switches as the circuit sets them, states from the
    /// elements' initial values, sources on their first segment. Diodes not settled.
    pub fn new(mut system: System, settle_capacity: usize) -> Result<Self, EngineError> {
        let topo = system.topology(initial_topology(&system))?;
        let z = initial_state(&system);
        let breaks = breaks_at(&system, 0.0);
        Ok(RunState {
            system,
            z,
            topo,
            breaks,
            visited: Vec::with_capacity(settle_capacity),
            flipped: Vec::with_capacity(settle_capacity),
        })
    }

    /// Present value of probe `k`, in the probe's own units.
    #[inline]
    pub fn probe(&self, k: usize) -> f64 {
        let r = self.system.diode_count() + self.system.observation.event_signals.len() + k;
        self.topo.value(r, &self.z)
    }

    /// Present value of event signal `k` (without offset or rate).
    #[inline]
    pub fn event_signal(&self, k: usize) -> f64 {
        self.topo.value(self.system.diode_count() + k, &self.z)
    }

    /// Turns a switch on or off; whether the topology changed (diodes not settled).
    pub fn set_gate(&mut self, switch: ElementId, on: bool) -> Result<bool, EngineError> {
        let bit = match (
            self.system.circuit.elements.get(switch.0),
            self.system.layout.bit_of.get(switch.0),
        ) {
            (Some(e), Some(Some(bit))) if matches!(e.kind, ElementKind::Switch { .. }) => *bit,
            _ => return Err(self.not_a("switch", switch)),
        };
        let t = self.topo.topology.with(bit, on);
        if t == self.topo.topology {
            return Ok(false);
        }
        self.topo = self.system.topology(t)?;
        Ok(true)
    }

    /// Sets an independent source's value and slope in z (diodes not settled).
    pub fn set_source(
        &mut self,
        source: ElementId,
        value: f64,
        slope: f64,
    ) -> Result<(), EngineError> {
        let l = &self.system.layout;
        let Some(k) = l.sources.iter().position(|&s| s == source) else {
            return Err(self.not_a("independent source", source));
        };
        if !(value.is_finite() && slope.is_finite()) {
            return Err(EngineError::BadOption {
                what: "source value",
                value,
                allowed: "finite value and slope",
            });
        }
        let (w, s) = (l.w(k), l.s(k));
        self.z[w] = value;
        self.z[s] = slope;
        Ok(())
    }

    /// Replaces the dynamic states x (length nx) (diodes not settled).
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
        Ok(())
    }

    /// Where the run stands at `time` seconds.
    pub fn handover(&self, time: f64) -> Handover {
        Handover {
            time,
            state: self.z.as_slice().to_vec(),
            topology: self.topo.topology,
        }
    }

    /// Takes over state and topology from another run and puts the schedule at `time`
    /// (the path's own time for `from.time`); checks the hand-over first, changing
    /// nothing when it is bad. Diodes not settled.
    pub fn take_over(&mut self, from: &Handover, time: f64) -> Result<(), EngineError> {
        check_handover(from, self.z.len())?;
        self.z.as_mut_slice().copy_from_slice(&from.state);
        self.topo = self.system.topology(from.topology)?;
        self.breaks = breaks_at(&self.system, time);
        Ok(())
    }

    /// Moves every source whose breakpoint `due` says has come onto its next segment.
    pub fn apply_breakpoints(&mut self, due: impl Fn(f64) -> bool) {
        let l = &self.system.layout;
        for k in 0..self.breaks.len() {
            let Some(tb) = self.breaks[k] else { continue };
            if !due(tb) {
                continue;
            }
            let seg = source_waveform(&self.system.circuit, l.sources[k]).segment(tb);
            self.z[l.w(k)] = seg.value;
            self.z[l.s(k)] = seg.slope;
            self.breaks[k] = seg.until;
        }
    }

    /// Brings the diodes to a consistent state at `time` seconds ([`settle_diodes`]);
    /// `g[..nd]` receives the settled switching functions.
    pub fn settle(&mut self, time: f64, g: &mut [f64]) -> Result<(), EngineError> {
        settle_diodes(
            &mut self.system,
            &mut self.topo,
            &self.z,
            time,
            &mut self.visited,
            &mut self.flipped,
            g,
        )
    }

    /// The present topology in words.
    pub fn describe_topology(&self) -> String {
        self.topo
            .topology
            .describe(&self.system.circuit, &self.system.layout)
    }

    fn not_a(&self, what: &str, id: ElementId) -> EngineError {
        let element = self
            .system
            .circuit
            .elements
            .get(id.0)
            .map_or_else(|| format!("element #{}", id.0), |e| e.name.clone());
        EngineError::BadReference {
            element,
            problem: format!("is not a {what}"),
        }
    }
}

/// Each source's next breakpoint after `time` seconds.
fn breaks_at(system: &System, time: f64) -> Vec<Option<f64>> {
    (system.layout.sources.iter())
        .map(|s| source_waveform(&system.circuit, *s).segment(time).until)
        .collect()
}

pub(crate) fn initial_topology(system: &System) -> Topology {
    let mut t = Topology::default();
    for (bit, id) in system.layout.switchable.iter().enumerate() {
        if let ElementKind::Switch {
            initially_on: true, ..
        } = system.circuit.elements[id.0].kind
        {
            t = t.with(bit, true);
        }
    }
    t
}

pub(crate) fn initial_state(system: &System) -> DVector<f64> {
    let l = &system.layout;
    let mut z = DVector::zeros(l.nz());
    for (i, e) in system.circuit.elements.iter().enumerate() {
        match (&e.kind, l.state_of[i]) {
            (
                ElementKind::Inductor {
                    initial_current, ..
                },
                Some(k),
            ) => z[k] = *initial_current,
            (
                ElementKind::Capacitor {
                    initial_voltage, ..
                },
                Some(k),
            ) => z[k] = *initial_voltage,
            _ => {}
        }
    }
    for (b, block) in system.circuit.blocks.iter().enumerate() {
        for (k, v) in block.initial_state.iter().enumerate() {
            z[l.block_offset[b] + k] = *v;
        }
    }
    z[l.one()] = 1.0;
    for (k, src) in l.sources.iter().enumerate() {
        let seg = source_waveform(&system.circuit, *src).segment(0.0);
        z[l.w(k)] = seg.value;
        z[l.s(k)] = seg.slope;
    }
    z
}

/// The waveform of an independent source (layout guarantees the kind).
pub(crate) fn source_waveform(circuit: &Circuit, id: ElementId) -> &Waveform {
    match &circuit.elements[id.0].kind {
        ElementKind::VoltageSource { waveform } | ElementKind::CurrentSource { waveform } => {
            waveform
        }
        _ => &Waveform::Constant(0.0),
    }
}
