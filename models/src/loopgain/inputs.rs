//! The load current and the input voltage as small-signal inputs of the sampled-data
//! model, for the closed loop's output impedance and line-to-output (audio
//! susceptibility) at the periodic steady state.
//!
//! Each input is held over the period like the control input of [`super::linearise`]
//! and differenced the same way: two period runs from the steady state's boundary with
//! the input at u₀ ± h give Γ_j, the duty's and the output's rows, per ampere or per
//! volt. The input is the converter's own source (the load sink, the input source) set
//! in the engine at the boundary, so the run is the converter as simulated with only
//! that value changed; the engine takes a sink current of either sign, so the
//! difference is centred even on a resistive load whose sink sits at 0 A.
//!
//! **Which output.** The output is read as its mean over the period, ⟨v̂ₒ⟩ₖ = C̄x̂ₖ +
//! D̄ⱼûₖ (an engine meter, [`super::sampler`]), not at the clock edge: the edge sample
//! sits at one point of the ripple, and the ripple's shape moves with the line (the
//! duty changes), so the edge sample drifts by −0.43 mV/V on the demo at DC while the
//! loop's integrator holds the mean to 5 µV/V: 40 dB of difference in a response the
//! loop suppresses to −70 dB. The mean is what the averaged model describes
//! (Erickson & Maksimović, 2nd ed., §7.1: the averaged variable is the moving mean over
//! a period) and what a designer means by the output's response.
//!
//! The closed-loop response to input j is then
//!
//! H_j(z) = (C̄(zI − Φ)⁻¹Γ_j + D̄_j)·e^{jω(r − ½)T_s},  z = e^{jωT_s},
//!
//! the mean referred to the middle of its period and the held input to the instant rT_s
//! it stands for ([`Disturbed::reference`]).

use nalgebra::DVector;

use super::sampler::{difference, Sampler};
use super::LinearOptions;
use crate::controller::ControllerSpec;
use crate::error::ModelError;
use crate::steady::SteadyState;
use crate::template::ForwardDesign;

/// A small-signal input other than the control input.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Disturbed {
    /// The load sink's current, amperes (positive draws from the output).
    LoadCurrent,
    /// The source voltage, volts.
    Line,
}

impl Disturbed {
    /// Where in the period, as a fraction of it, the held value stands for the
    /// continuous input it replaces: the instant whose value a held step best matches
    /// to first order in ωT_s, the centroid of the interval over which the input
    /// reaches the output. The load current enters the output node all period long:
    /// the middle of the period. The source reaches the output only while the switch
    /// conducts (the reset interval returns magnetising energy to the source but moves
    /// no charge to the output): the middle of the on-time, D/2.
    pub fn reference(self, duty: f64) -> f64 {
        match self {
            Disturbed::LoadCurrent => 0.5,
            Disturbed::Line => 0.5 * duty,
        }
    }

    /// The input's value in `design`.
    pub(crate) fn value(self, design: &ForwardDesign) -> f64 {
        match self {
            Disturbed::LoadCurrent => design.load.current.unwrap_or(0.0),
            Disturbed::Line => design.input.voltage,
        }
    }

    /// The step: [`LinearOptions::input_step`] of the value, of at least 1 A or 1 V.
    fn step(self, design: &ForwardDesign, opts: &LinearOptions) -> f64 {
        opts.input_step * self.value(design).abs().max(1.0)
    }
}

/// One input's column of the linearised period map, per unit of the input.
#[derive(Clone, Debug, PartialEq)]
pub struct InputColumn {
    /// ∂P/∂u_j.
    pub gamma: DVector<f64>,
    /// ∂d/∂u_j of the period's duty.
    pub duty: f64,
    /// ∂v_o/∂u_j of the output voltage at the period's end.
    pub out: f64,
    /// ∂⟨v_o⟩/∂u_j of the output voltage's mean over the period.
    pub mean: f64,
}

/// Linearises the period map of `design` under `spec` about `steady` in `input`.
pub fn linearise_input(
    design: &ForwardDesign,
    spec: &ControllerSpec,
    steady: &SteadyState,
    input: Disturbed,
    opts: &LinearOptions,
) -> Result<InputColumn, ModelError> {
    let mut sampler = Sampler::new(design, spec)?;
    column(&mut sampler, design, steady, input, opts)
}

/// [`linearise_input`] on a sampler of `design` already built.
pub(crate) fn column(
    sampler: &mut Sampler,
    design: &ForwardDesign,
    steady: &SteadyState,
    input: Disturbed,
    opts: &LinearOptions,
) -> Result<InputColumn, ModelError> {
    let h = input.step(design, opts);
    let plus = sampler.sample_input(&steady.x, input, h)?;
    let minus = sampler.sample_input(&steady.x, input, -h)?;
    let d = difference(&plus, &minus, h);
    Ok(InputColumn {
        gamma: DVector::from_vec(d.x),
        duty: d.duty,
        out: d.out,
        mean: d.mean,
    })
}
