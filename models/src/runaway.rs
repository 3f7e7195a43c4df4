//! The runaway guard: a core walked far past its saturation knee is a design that has
//! failed, and going on only grows the numbers without meaning (the two-slope core has
//! no physics there, and a real switch would have failed long before). The guard stops
//! such a run with what crossed which limit, when and in which cycle, as a design
//! failure rather than a simulation error.

use stepflux_engine::Stepper;
use thiserror::Error;

use crate::components::Transformer;
use crate::run::ConverterRun;

/// Multiple of the knee current (the magnetising current at which the unsaturated
/// inductance reaches Bsat) past which a run stops. A working design keeps its peak
/// below 1×; at 10× the run has shown the walk into saturation for many cycles, and
/// the current is an order of magnitude past anything the core was designed for (a
/// choice of this project).
pub const KNEE_MULTIPLE: f64 = 10.0;

/// A run stopped because the magnetising current ran away.
#[derive(Clone, Debug, Error, PartialEq)]
#[error(
    "core runaway: magnetising current {current:.3} A at {time:.6e} s (cycle {cycle}) is \
     past {KNEE_MULTIPLE} × the knee current {knee:.3} A (Bsat); the core has walked into \
     saturation and the run stops here"
)]
pub struct Runaway {
    /// When, seconds.
    pub time: f64,
    /// Cycle records opened so far less one: the cycle it happened in.
    pub cycle: usize,
    /// The magnetising current, amperes.
    pub current: f64,
    /// The knee current, amperes.
    pub knee: f64,
}

/// Watches the magnetising current of a run against [`KNEE_MULTIPLE`] × the knee.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RunawayGuard {
    knee: f64,
}

impl RunawayGuard {
    /// The guard for a core.
    pub fn new(transformer: &Transformer) -> Self {
        RunawayGuard {
            knee: transformer.knee_current(),
        }
    }

    /// The current past which a run stops, amperes.
    pub fn limit(&self) -> f64 {
        KNEE_MULTIPLE * self.knee
    }

    /// Checks the run where it stands; `cycle` is the cycle under way.
    pub fn check<S: Stepper>(&self, run: &ConverterRun<S>, cycle: usize) -> Result<(), Runaway> {
        let current = run.probe("mag.i").unwrap_or(0.0);
        // A non-finite current has run away too.
        if current.abs() <= self.limit() {
            return Ok(());
        }
        Err(Runaway {
            time: run.sim.time(),
            cycle,
            current,
            knee: self.knee,
        })
    }
}
