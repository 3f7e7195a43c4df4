//! # stepflux-engine
//!
//! A generic piecewise-linear state-space simulator for switched circuits. It owns:
//! the circuit description ([`Circuit`]), structural checks (capacitor loops, inductor
//! cut-sets), per-topology state equations by nodal analysis, exact stepping with the
//! matrix exponential on an integer time grid, event location, diode-state settling,
//! a storm guard, streaming output through a [`Sink`], exact quadratic meters (energy
//! integrals), on request the sensitivity ∂x/∂x₀ carried along a run (step propagators
//! with saltation matrices at switching instants, [`Simulation::track_sensitivity`]),
//! and a second, independent integration path through `ode_solvers`
//! (Dop853) for cross-checks.
//!
//! It must not depend on, or know of: converters, controllers, files, threads,
//! terminals or serialisation. Callers drive switches and sources; the engine reports
//! why each step stopped.
//!
//! ```
//! use stepflux_engine::{Circuit, NodeId, Observation, Quantity, Signal, SimOptions, Simulation, Waveform, NullSink};
//! // 1 V through 1 kΩ into 1 µF: after one time constant the capacitor holds 1 − 1/e V.
//! let mut c = Circuit::new();
//! let (vin, out) = (c.node("in"), c.node("out"));
//! c.voltage_source("V1", vin, NodeId::GROUND, Waveform::Constant(1.0)).unwrap();
//! c.resistor("R1", vin, out, 1e3).unwrap();
//! c.capacitor("C1", out, NodeId::GROUND, 1e-6, 0.0).unwrap();
//! let obs = Observation { probes: vec![("out".into(), Signal::of(Quantity::NodeVoltage(out)))], ..Default::default() };
//! let mut sim = Simulation::new(c, obs, SimOptions::for_period(1e-3)).unwrap();
//! sim.advance(1e-3, &mut NullSink).unwrap();
//! assert!((sim.probe(0) - (1.0 - (-1.0f64).exp())).abs() < 1e-12);
//! ```
#![deny(missing_docs)]

mod check;
mod circuit;
mod controlled;
mod error;
mod event;
mod kernel;
mod ladder;
mod layout;
mod lu;
mod nodal;
pub mod reference;
mod run;
mod sim;
mod stepper;
mod system;
mod topology;
mod validate;
mod waveform;

pub use circuit::{
    Block, BlockId, Circuit, DiodeParams, Element, ElementId, ElementKind, NodeId, Quantity,
    Signal, SwitchParams, Winding,
};
pub use error::EngineError;
pub use event::{
    Direction, EventFn, EventSlot, NullSink, Sink, StepOutcome, Stop, TraceKind, TracePoint,
    Turning, MAX_ARMED,
};
pub use ladder::{clear_shared_ladders, Tick, TimeGrid};
pub use layout::{Layout, StateKind};
pub use nodal::Nodal;
pub use sim::{EventStamp, SimOptions, Simulation, StormGuard};
pub use stepper::{Handover, Stepper};
pub use system::{Meter, Observation, System, TopologyData};
pub use topology::Topology;
pub use waveform::{Segment, Waveform};
