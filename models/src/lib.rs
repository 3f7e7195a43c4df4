//! # stepflux-models
//!
//! Forward converters on the stepflux engine. It owns: components as a designer enters
//! them ([`components`]), converter templates that expand a design into an engine
//! circuit with named probes ([`template`]), the open-loop gate source ([`gate`]), the
//! behavioural PWM controller ([`controller`]), load/line/reference steps
//! ([`disturbance`]), the
//! per-cycle core-reset table ([`cycles`]), the sampled-data loop gain ([`loopgain`]), and the closed-form design figures the
//! templates are checked against ([`figures`]).
//!
//! It depends on `stepflux-engine` only: no files, threads, terminals or serialisation.
//! Everything here is deterministic.
#![deny(missing_docs)]

pub mod averaged;
pub mod components;
pub mod controller;
pub mod cycles;
pub mod demo_design;
pub mod disturbance;
mod error;
pub mod figures;
pub mod gate;
pub mod job;
pub mod loopgain;
pub mod measure;
pub mod run;
pub mod runaway;
pub mod steady;
pub mod template;

pub use error::ModelError;
