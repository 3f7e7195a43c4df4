//! One period of the closed loop from any states at the first clock edge, with the
//! output voltage's mean over the period beside its value at the period's end: the
//! primitive every column of the linearisation is differenced from.
//!
//! It is the loop [`super::loop_map`] runs (soft starts over, trial grid), built with
//! one engine meter, ∫ v_o dt, so the mean is exact for the piecewise-linear waveform
//! (the meter integrates each interval in closed form) rather than a quadrature that
//! a moving turn-off would bias. Shooting keeps its meterless map: a meter makes every
//! topology's propagator carry a block exponential, which a search does not need.

use stepflux_engine::{Meter, NullSink, Quantity, Signal};

use super::Disturbed;
use crate::controller::modulator::{ClosedLoop, LoopSnapshot};
use crate::controller::ControllerSpec;
use crate::cycles::CycleRecord;
use crate::error::ModelError;
use crate::steady::map::{settled_spec, trial_options};
use crate::template::ForwardDesign;

/// What one period from (x, u) gives.
pub(crate) struct Sample {
    /// States at the period's end.
    pub x: Vec<f64>,
    /// The period's duty.
    pub duty: f64,
    /// Output voltage at the period's end, volts.
    pub out: f64,
    /// Output voltage's mean over the period, volts.
    pub mean: f64,
}

/// Per unit of input: the central difference of two [`Sample`]s.
pub(crate) struct Derivative {
    pub x: Vec<f64>,
    pub duty: f64,
    pub out: f64,
    pub mean: f64,
}

/// The metered closed loop, returned to its first clock edge for every sample.
pub(crate) struct Sampler {
    lp: ClosedLoop,
    at: LoopSnapshot,
    period: f64,
    /// Periods run since the last [`Sampler::restore`].
    periods: usize,
    /// The load sink's current and the source voltage as built, amperes and volts.
    base: [f64; 2],
}

impl Sampler {
    /// The loop of `design` under `spec` ([`settled_spec`]) on the trial grid.
    pub fn new(design: &ForwardDesign, spec: &ControllerSpec) -> Result<Self, ModelError> {
        let spec = settled_spec(spec);
        let period = spec.clock_period();
        let meter = |conv: &crate::template::Converter| {
            let out = conv
                .probes
                .iter()
                .find(|p| p.name == "out.v")
                .ok_or_else(|| {
                    ModelError::Infeasible("loop gain: the converter has no out.v".into())
                })?;
            Ok(vec![Meter {
                name: "out.v dt".into(),
                terms: vec![(1.0, out.signal.clone(), Signal::of(Quantity::One))],
            }])
        };
        let lp = ClosedLoop::with_meters(design, &spec, &[], trial_options(period), meter)?;
        let base = [design.load.current.unwrap_or(0.0), design.input.voltage];
        Ok(Sampler {
            at: lp.snapshot(),
            lp,
            period,
            periods: 0,
            base,
        })
    }

    /// Switching period, seconds.
    pub fn period(&self) -> f64 {
        self.period
    }

    /// Back to the first clock edge with states `x`, every source as built.
    pub fn restore(&mut self, x: &[f64]) -> Result<(), ModelError> {
        self.lp.restore(&self.at, x)?;
        self.periods = 0;
        Ok(())
    }

    /// Holds `input` at `offset` from its value as built (amperes or volts; the engine
    /// takes a sink current of either sign) until the next [`Sampler::hold`] or
    /// [`Sampler::restore`].
    pub fn hold(&mut self, input: Disturbed, offset: f64) -> Result<(), ModelError> {
        let key = &self.lp.converter.key;
        let (element, base) = match input {
            Disturbed::LoadCurrent => (key.load_sink, self.base[0]),
            Disturbed::Line => (key.input_source, self.base[1]),
        };
        self.lp.run.sim.set_source(element, base + offset, 0.0)?;
        Ok(())
    }

    /// One period from where the loop stands, with `u` volts held at the modulator's
    /// control input.
    pub fn period_on(&mut self, u: f64) -> Result<Sample, ModelError> {
        // The meter keeps integrating across a return: read the period as a difference.
        let before = self.lp.run.sim.meters()[0];
        self.lp.control_offset = u;
        let mut cycles: Vec<CycleRecord> = Vec::new();
        self.periods += 1;
        let t_end = self.at.run.handover.time + self.periods as f64 * self.period;
        let ran = self.lp.run_until(t_end, &mut NullSink, &mut cycles);
        self.lp.control_offset = 0.0;
        ran?;
        let mean = (self.lp.run.sim.meters()[0] - before) / self.period;
        let duty = cycles
            .last()
            .map(|c| c.duty)
            .ok_or_else(|| ModelError::Infeasible("loop gain: no pulse in the period".into()))?;
        let out = self.lp.run.probe("out.v").ok_or_else(|| {
            ModelError::Infeasible("loop gain: the converter has no out.v".into())
        })?;
        let nx = self.lp.run.sim.system().layout().nx();
        let x = self.lp.run.sim.state().as_slice()[..nx].to_vec();
        Ok(Sample { x, duty, out, mean })
    }

    /// One period from states `x` with `u` volts held at the modulator's control input.
    pub fn sample(&mut self, x: &[f64], u: f64) -> Result<Sample, ModelError> {
        self.restore(x)?;
        self.period_on(u)
    }

    /// One period from states `x` with `input` held at `offset` from its value as built.
    pub fn sample_input(
        &mut self,
        x: &[f64],
        input: Disturbed,
        offset: f64,
    ) -> Result<Sample, ModelError> {
        self.restore(x)?;
        self.hold(input, offset)?;
        self.period_on(0.0)
    }
}

/// Central difference of two samples a step `h` either side (2h apart).
pub(crate) fn difference(plus: &Sample, minus: &Sample, h: f64) -> Derivative {
    let d = |a: f64, b: f64| (a - b) / (2.0 * h);
    Derivative {
        x: plus
            .x
            .iter()
            .zip(&minus.x)
            .map(|(a, b)| d(*a, *b))
            .collect(),
        duty: d(plus.duty, minus.duty),
        out: d(plus.out, minus.out),
        mean: d(plus.mean, minus.mean),
    }
}
