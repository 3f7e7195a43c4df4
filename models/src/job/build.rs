//! The converter exactly as a job's run simulates it — power stage, the controller's
//! analogue parts, the disturbance branches — built once: `check` reads its probes and
//! states from it, and the run goes on from the same build.

use super::{Drive, Job};
use crate::controller::ControllerParts;
use crate::disturbance::{prepare, Disturbance};
use crate::run::Action;
use crate::steady::names::{circuit_state_names, StateName};
use crate::template::{Converter, ForwardDesign};
use crate::ModelError;

/// A job's converter, built.
#[derive(Clone, Debug)]
pub struct Built {
    /// The circuit with its probes.
    pub converter: Converter,
    /// The disturbances' scheduled actions.
    pub actions: Vec<(f64, Action)>,
    /// The controller's parts in the circuit (closed loop only).
    pub parts: Option<ControllerParts>,
}

impl Built {
    /// Builds `job`'s power stage, its controller's parts as simulated
    /// ([`Job::simulated_drive`]) and the disturbance branches.
    pub fn for_job(job: &Job) -> Result<Self, ModelError> {
        Self::new(&job.design, &job.simulated_drive(), &job.disturbances)
    }

    /// Builds the power stage, the controller's parts under `drive` and the
    /// disturbance branches.
    pub fn new(
        design: &ForwardDesign,
        drive: &Drive,
        disturbances: &[Disturbance],
    ) -> Result<Self, ModelError> {
        let conv = design.build()?;
        let (converter, actions, parts) = match drive {
            Drive::Controller(spec) => {
                let (with, parts) = spec.attach(&conv)?;
                let (c, a) = prepare(&with, disturbances, Some(parts.reference))?;
                (c, a, Some(parts))
            }
            Drive::OpenLoop(_) => {
                let (c, a) = prepare(&conv, disturbances, None)?;
                (c, a, None)
            }
        };
        Ok(Built {
            converter,
            actions,
            parts,
        })
    }

    /// Probe names in sample order.
    pub fn probe_names(&self) -> Vec<String> {
        self.converter
            .probes
            .iter()
            .map(|p| p.name.clone())
            .collect()
    }

    /// The dynamic states by name, in the engine's order.
    pub fn states(&self) -> Result<Vec<StateName>, ModelError> {
        circuit_state_names(&self.converter.circuit)
    }
}
