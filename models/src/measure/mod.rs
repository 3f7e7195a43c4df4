//! What a designer reads off a run: losses and efficiency, start-up, load and line
//! steps, ripple, and the per-cycle core-reset check.
//!
//! Everything streams. A measurement sees samples `(time, probe values, at_event)` and
//! closed cycle records; a job's run feeds its plan through its own fan-out
//! (`job::run`), and [`Tee`] does the same for a hand-made set of measurements (the
//! models tests' rigs), forwarding both streams to the run's own sinks so writers keep
//! streaming. Each measurement keeps O(1) state (or
//! O(window) where stated) and never stores a run. Energies are not sampled at all:
//! [`LossMeters`] makes engine meters (exact quadratic integrals) and reads them at two
//! instants.
//!
//! Every result reduces to a list of [`Figure`]s, each an instance of a declaration
//! in the [`catalogue`] made beside the code that produces it.
//!
//! Fed from a run, measurements see the trace of the exact solution
//! ([`stepflux_engine::TracePoint`]): every step end and switching instant, and each
//! traced probe's maxima and minima inside a step. Where those points fall depends
//! on the circuit alone, so no figure depends on the output sample interval, and
//! peaks, dips and ripple are the solution's own. Averages integrate the cubic
//! through each pair of points and their slopes ([`window`]).

pub mod catalogue;
pub mod coss;
pub mod efficiency;
mod losses;
pub mod part_losses;
pub mod reset_check;
pub mod ripple;
pub mod startup;
pub mod step;
mod tee;
mod window;

pub use catalogue::{Figure, FigureDef, Kind, Section, Value, Worse};
pub use coss::CossTurnOn;
pub use efficiency::LossReport;
pub use losses::{EnergySnapshot, LossClass, LossMeters};
pub use part_losses::{PartEnergies, PartLosses};
pub use reset_check::{Criterion, CycleCheck, ResetCheck, ResetLimits, ResetVerdict};
pub use ripple::{Ripple, RippleResult};
pub use startup::{StartUp, StartUpResult};
pub use step::{StepResponse, StepResult, StepSettings};
pub use tee::{CycleTee, SampleTee, Tee};

use stepflux_engine::{TraceKind, TracePoint};

use crate::cycles::CycleRecord;
use crate::error::ModelError;
use crate::template::Probe;

/// A streaming measurement: fed samples and cycle records, reports figures.
pub trait Measurement {
    /// One sample: time in seconds, probe values in probe order, and whether it was
    /// taken at an event.
    fn sample(&mut self, _time: f64, _values: &[f64], _at_event: bool) {}
    /// One point of the exact solution (step ends, switching instants, extrema of
    /// traced probes). The default takes it as a sample.
    fn trace(&mut self, point: &TracePoint<'_>) {
        self.sample(point.time, point.values, point.kind == TraceKind::Event);
    }
    /// One closed cycle record.
    fn cycle(&mut self, _record: &CycleRecord) {}
    /// The figures so far.
    fn figures(&self) -> Vec<Figure>;
}

/// Position of probe `name`, or an error naming it.
pub(crate) fn probe_index(probes: &[Probe], name: &str) -> Result<usize, ModelError> {
    probes
        .iter()
        .position(|p| p.name == name)
        .ok_or_else(|| ModelError::Infeasible(format!("measurement needs probe '{name}'")))
}

/// Time, value and slope (NaN when not traced) of probe `column` at a trace point,
/// or `None` when the point does not carry it.
pub(crate) fn at_point(point: &TracePoint<'_>, column: usize) -> Option<(f64, f64, f64)> {
    let v = *point.values.get(column)?;
    let slope = point.slopes.get(column).copied().unwrap_or(f64::NAN);
    Some((point.time, v, slope))
}

/// Value as a percentage of `of`.
pub(crate) fn percent(value: f64, of: f64) -> f64 {
    100.0 * value / of
}

#[cfg(test)]
mod tests;
