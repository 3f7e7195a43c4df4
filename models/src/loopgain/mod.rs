//! Small-signal loop gain from the switching model: the sampled-data model of
//! Verghese, Elbuluk & Kassakian ("A general approach to sampled-data modeling for
//! power electronic circuits", IEEE Trans. Power Electron. PE-1(2), 1986).
//!
//! **Method.** Around the periodic steady state x* (found by [`crate::steady`]), the
//! closed-loop period map is linearised in the states and in one small-signal input u,
//! held over the period:
//!
//! x̂ₖ₊₁ = Φ x̂ₖ + Γ ûₖ,  d̂ₖ = K x̂ₖ + k_u ûₖ,  v̂ₒ,ₖ₊₁ = C x̂ₖ + D ûₖ,
//!
//! Φ = ∂P/∂x, Γ = ∂P/∂u, K and k_u the duty of period k (turn-off command over the
//! period, [`crate::cycles::CycleRecord::duty`]), C and D the output voltage at the end of
//! the period. Every entry is a central difference of two period runs from the steady
//! state's boundary (2·nx + 2 runs, the same snapshot/restore machinery as shooting, on
//! a loop that also meters the output's period mean, [`sampler`]), so diodes, the
//! comparator and the sequential logic need no per-event bookkeeping. The load current
//! and the source voltage are two more held inputs, four more runs ([`inputs`]), for
//! the closed loop's output impedance and line-to-output; [`inject_input`] measures the
//! same two by moving the source sinusoidally in the switching simulation.
//!
//! **Where the loop is broken.** u is a voltage in series at the modulator's control
//! input, between the error amplifier's output and the PWM comparator
//! ([`crate::controller::modulator::ClosedLoop::control_offset`]). The comparator reads
//! its input once per period, at the turn-off instant: that is the loop's one sampler,
//! and the loop gain is defined there. With v̂ₘ the modulator input at that instant,
//! d̂ = k_u·v̂ₘ (k_u = ∂d/∂u at fixed states, ≈ −1/(peak − valley) with this project's
//! falling ramp), and v̂ₘ = v̂_c + û, so the closed-loop duty response H_d(z) =
//! K(zI − Φ)⁻¹Γ + k_u gives v̂ₘ/û = H_d/k_u = 1/(1 + T) (Middlebrook's injection
//! relation, T = −v̂_c/v̂ₘ), i.e.
//!
//! T(z) = k_u / H_d(z) − 1,  z = e^{jωT_s}.
//!
//! T is positive real at DC, as the averaged model's [`crate::averaged::AveragedModel::loop_gain`].
//! Reading v̂_c through the duty places it at the sampling instant; reading it at the
//! clock edge instead would mix in the control voltage's motion between the edge and
//! the turn-off (a lag of ωDT_s, 7° at fs/20 with D = 0.4) and give a different,
//! wrong loop gain.
//!
//! **Control-to-output** v̂ₒ/v̂ₘ = k_u·H_o/H_d with H_o(z) = z⁻¹(C(zI − Φ)⁻¹Γ + D), the
//! output sampled at the clock edge; multiplied by e^{jωDT_s} to refer the duty to its
//! turn-off instant, so it compares with a continuous-time model.
//!
//! **Margins** ([`margins`]): crossover where |T| falls through 1, phase margin 180° +
//! ∠T there (phase unwrapped from the lowest frequency), gain margin −20·log₁₀|T| where
//! the phase first falls through −180°.

mod injection;
mod input_injection;
mod inputs;
mod response;
mod sampler;
#[cfg(test)]
mod tests;

use nalgebra::{DMatrix, DVector};

pub use injection::{commensurate, inject, inject_at, InjectionOptions, InjectionPoint};
pub use input_injection::{inject_input, InputInjection};
pub use inputs::{linearise_input, Disturbed, InputColumn};
pub use response::{
    log_grid, margins, margins_on_grid, peak_output_impedance, Bode, BodePoint, Margins,
};

use crate::controller::ControllerSpec;
use crate::error::ModelError;
use crate::steady::map::trial_options;
use crate::steady::map::ClosedLoopMap;
use crate::steady::{shoot, ShootingOptions, SteadyError, SteadyState};
use crate::template::ForwardDesign;
use sampler::{difference, Sampler};

crate::measure::catalogue::figures! {
    CROSSOVER = "loop.crossover", "Hz", Number, Neither, Files,
        "loop crossover", "Frequency where the sampled-data loop gain at the steady state crosses 0 dB.";
    PHASE_MARGIN = "loop.phase_margin_deg", "°", Number, Lower, Files,
        "phase margin", "180° plus the loop gain's phase at crossover.";
    GAIN_MARGIN = "loop.gain_margin_db", "dB", Number, Lower, Files,
        "gain margin", "How far below 0 dB the loop gain is where its phase reaches −180°.";
    PEAK_OUTPUT_IMPEDANCE = "loop.peak_output_impedance", "Ω", Number, Higher, Files,
        "peak output impedance", "Largest closed-loop output impedance of the sampled-data model at the steady state, fs/1000 to fs/2.";
}
/// Finite-difference steps of the linearisation.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LinearOptions {
    /// Relative step of each state: h_j = state_step·max(|x_j|, 1 unit).
    pub state_step: f64,
    /// Injection step as a fraction of the ramp amplitude (peak − valley).
    pub injection_step: f64,
    /// Step of the load current and of the source voltage, relative to their values
    /// (at least 1 A or 1 V): see [`Default`].
    pub input_step: f64,
}

impl Default for LinearOptions {
    /// 1e-6 of each state and of the ramp: a duty change of about 1e-6, a million ticks
    /// of the trial grid (1e-12 of the period), so the event staircase is 1e-6 of the
    /// difference, while the curvature error of a central difference is of order h²,
    /// far below it.
    ///
    /// The load and line steps are larger, 1e-4: their DC responses are what the loop's
    /// integrator leaves, small differences of large terms (0.66 µΩ, 5.4 µV/V on the
    /// demo), and at 1e-6 the staircase moved the DC output impedance by 6 %; from 1e-5
    /// to 1e-3 it stays within 0.7 %, and at 1.5 kHz all within 1e-5.
    fn default() -> Self {
        LinearOptions {
            state_step: 1e-6,
            injection_step: 1e-6,
            input_step: 1e-4,
        }
    }
}

/// The linearised period map with the injection input, and the rows read from it.
#[derive(Clone, Debug, PartialEq)]
pub struct SampledModel {
    /// Φ = ∂P/∂x at the steady state.
    pub phi: DMatrix<f64>,
    /// Γ = ∂P/∂u, per volt of injection.
    pub gamma: DVector<f64>,
    /// K = ∂d/∂x of the period's duty.
    pub duty_x: DVector<f64>,
    /// k_u = ∂d/∂u, per volt.
    pub duty_u: f64,
    /// ∂v_o/∂x of the output voltage at the period's end.
    pub out_x: DVector<f64>,
    /// ∂v_o/∂u at the period's end, volts per volt.
    pub out_u: f64,
    /// Switching period T_s, seconds.
    pub period: f64,
    /// Steady duty.
    pub duty: f64,
    /// ∂⟨v_o⟩/∂x of the output voltage's mean over the period.
    pub mean_x: DVector<f64>,
    /// Output voltage at the steady state's clock edge, volts.
    pub output: f64,
    /// Output voltage's mean over the steady period, volts.
    pub mean_output: f64,
    /// The load current's column, per ampere ([`linearise_input`]).
    pub load: InputColumn,
    /// The source voltage's column, per volt.
    pub line: InputColumn,
}

/// Linearises the closed loop of `design` under `spec` (single-ended) about `steady`,
/// in the states, the control input, the load current and the source voltage.
pub fn linearise(
    design: &ForwardDesign,
    spec: &ControllerSpec,
    steady: &SteadyState,
    opts: &LinearOptions,
) -> Result<SampledModel, ModelError> {
    if spec.mode != crate::controller::OutputMode::SingleEnded {
        return Err(ModelError::Infeasible(
            "loop gain: alternating outputs are not modelled yet (single-ended only)".into(),
        ));
    }
    let mut sampler = Sampler::new(design, spec)?;
    let n = steady.x.len();
    let mut phi = DMatrix::zeros(n, n);
    let mut duty_x = DVector::zeros(n);
    let mut out_x = DVector::zeros(n);
    let mut mean_x = DVector::zeros(n);
    for j in 0..n {
        // 1 A, 1 V or 1 block unit for states that sit near zero, as in shooting.
        let h = opts.state_step * steady.x[j].abs().max(1.0);
        let mut xp = steady.x.clone();
        xp[j] += h;
        let plus = sampler.sample(&xp, 0.0)?;
        xp[j] -= 2.0 * h;
        let minus = sampler.sample(&xp, 0.0)?;
        let d = difference(&plus, &minus, h);
        phi.set_column(j, &DVector::from_vec(d.x));
        duty_x[j] = d.duty;
        out_x[j] = d.out;
        mean_x[j] = d.mean;
    }
    let o = &spec.oscillator;
    let hu = opts.injection_step * (o.peak - o.valley);
    let plus = sampler.sample(&steady.x, hu)?;
    let minus = sampler.sample(&steady.x, -hu)?;
    let d = difference(&plus, &minus, hu);
    let centre = sampler.sample(&steady.x, 0.0)?;
    if d.duty >= 0.0 {
        return Err(ModelError::Infeasible(format!(
            "loop gain: the duty does not follow the control input (∂d/∂u = {:e} /V): \
             the pulse ends at the duty clamp or is blanked, so the loop is open",
            d.duty
        )));
    }
    Ok(SampledModel {
        phi,
        gamma: DVector::from_vec(d.x),
        duty_x,
        duty_u: d.duty,
        out_x,
        out_u: d.out,
        mean_x,
        period: sampler.period(),
        duty: centre.duty,
        output: centre.out,
        mean_output: centre.mean,
        load: inputs::column(&mut sampler, design, steady, Disturbed::LoadCurrent, opts)?,
        line: inputs::column(&mut sampler, design, steady, Disturbed::Line, opts)?,
    })
}

/// Shoots for the steady state of `design` under `spec` (soft starts over, on the trial
/// grid, [`trial_options`]) and linearises the period map there, in the control input,
/// the load current and the source voltage.
pub fn sampled_model(
    design: &ForwardDesign,
    spec: &ControllerSpec,
    opts: &LinearOptions,
) -> Result<(SteadyState, SampledModel), SteadyError> {
    let mut map = loop_map(design, spec)?;
    let steady = shoot(&mut map, &ShootingOptions::default())?;
    let model = linearise(design, spec, &steady, opts)?;
    Ok((steady, model))
}

/// The closed loop as [`sampled_model`] and [`inject`] run it: soft starts over, on the
/// trial grid. One per thread when frequencies are injected in parallel.
pub fn loop_map(
    design: &ForwardDesign,
    spec: &ControllerSpec,
) -> Result<ClosedLoopMap, ModelError> {
    ClosedLoopMap::new(design, spec, trial_options(spec.clock_period()))
}
