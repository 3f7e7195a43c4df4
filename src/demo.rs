//! `stepflux demo`: the built-in default — start-up of the demonstration design under
//! its controller, a load step up and back — run through the same pipeline as any
//! scenario file, writing under `out/demo/`.

use std::path::Path;

use stepflux_models::demo_design::{demo_controller, demo_design};
use stepflux_models::disturbance::Disturbance;

use crate::job::{Analysis, Drive, Job, Limits, Start};
use crate::pipeline::{run_job, RunOutput};

/// The demo as a job: 10 ms with 1 ms duty and reference soft starts, +2 A at 6 ms and back at 8 ms,
/// both at 1 A/µs.
pub fn demo_job() -> Job {
    let disturbances = vec![
        Disturbance::LoadCurrent {
            time: 6e-3,
            to: 2.0,
            slew: 1e6,
        },
        Disturbance::LoadCurrent {
            time: 8e-3,
            to: 0.0,
            slew: 1e6,
        },
    ];
    Job {
        name: "demo".into(),
        description:
            "Built-in demo: 24 V to 5 V forward converter with a reset winding; start-up, \
                      then a 4 A to 6 A load step and back."
                .into(),
        design: demo_design(),
        drive: Drive::Controller(demo_controller()),
        disturbances,
        analysis: Analysis {
            stop_time: 10e-3,
            sample_interval: 0.5e-6,
            start: Start::Zero,
        },
        limits: Limits {
            startup_overshoot_percent: Some(5.0),
            reset_margin_percent: Some(5.0),
            flux_margin_percent: Some(20.0),
            ripple: Some(0.05),
            ..Limits::default()
        },
        signals: Vec::new(),
        bias_power: 0.15,
        source_text: "built-in demo (see src/demo.rs)".into(),
    }
}

/// Runs the demo into `out/demo/`.
pub fn run(out: &Path, progress: &(dyn Fn(f64) + Sync)) -> anyhow::Result<RunOutput> {
    run_job(&demo_job(), out, progress)
}
