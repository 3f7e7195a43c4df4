//! Shared rig of the closed-loop measurement tests: a demo converter under its
//! controller with the energy meters attached, run in segments with the measurements
//! teed into the sample and cycle streams.
//!
//! Each test binary compiles this module separately and uses only part of it.
#![allow(dead_code)]

use stepflux_engine::{NullSink, SimOptions};
use stepflux_models::controller::modulator::ClosedLoop;
use stepflux_models::controller::ControllerSpec;
use stepflux_models::cycles::{CycleRecord, CycleSink};
use stepflux_models::disturbance::Disturbance;
use stepflux_models::measure::{LossMeters, Measurement, Tee};
use stepflux_models::template::ForwardDesign;

/// A closed loop with its energy account.
pub struct Rig {
    /// The loop.
    pub cl: ClosedLoop,
    /// Its energy account (meters already in the run).
    pub ledger: LossMeters,
}

/// Options: the controller's, with output samples every `sample_dt` seconds.
pub fn options(spec: &ControllerSpec, sample_dt: f64) -> SimOptions {
    let mut o = ClosedLoop::default_options(spec);
    o.sample_interval = Some(sample_dt);
    o
}

impl Rig {
    /// Builds the loop with loss meters made from the circuit as simulated.
    pub fn new(
        design: &ForwardDesign,
        spec: &ControllerSpec,
        disturbances: &[Disturbance],
        sample_dt: f64,
    ) -> Rig {
        let cl =
            ClosedLoop::with_meters(design, spec, disturbances, options(spec, sample_dt), |c| {
                Ok(LossMeters::new(c)?.meters())
            })
            .unwrap();
        let ledger = LossMeters::new(&cl.converter).unwrap();
        Rig { cl, ledger }
    }

    /// Runs to `t_end` feeding `measurements` and `cycles`.
    pub fn run(
        &mut self,
        t_end: f64,
        measurements: Vec<&mut dyn Measurement>,
        cycles: &mut dyn CycleSink,
    ) {
        let tee = Tee::new(measurements);
        self.cl
            .run_until(
                t_end,
                &mut tee.samples(&mut NullSink),
                &mut tee.cycles(cycles),
            )
            .unwrap();
    }
}

/// Keeps nothing: for runs whose records only feed measurements.
pub struct NoCycles;

impl CycleSink for NoCycles {
    fn cycle(&mut self, _record: &CycleRecord) {}
}

/// Clock periods, seconds, of `n` periods at `f` hertz.
pub fn periods(n: f64, f: f64) -> f64 {
    n / f
}
