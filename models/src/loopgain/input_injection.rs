//! Output impedance and line-to-output by perturbing the switching simulation itself:
//! the load sink's current or the source voltage moved sinusoidally, the output's
//! period means Fourier-extracted once the loop has settled. Independent of the
//! linearisation of [`super::inputs`]: no derivative is taken, the nonlinear switching
//! loop is run, with the same grid, settling and amplitude rules as the loop gain's
//! injection ([`super::inject`]).
//!
//! **The excitation.** The input is held over each switching period at
//! uₖ = A·cos(ωkT_s), set on the converter's own source at every clock edge: the
//! excitation the sampled-data model describes, so the two methods compare like with
//! like; the held value stands for the instant (k + r)T_s ([`Disturbed::reference`]),
//! where the DFT reads it. (Cosine phase at the clock edge: at fs/2 the held sequence
//! is A·(−1)ᵏ, never the zero a cosine phased at the period's middle would give.) **The response.** ⟨v_o⟩ₖ, the output's mean over period k (an engine
//! meter), stands for the middle of the period; with f = M·f_s/N ([`commensurate`]) a
//! single DFT bin over N periods has no leakage from the DC level and the steady
//! ripple, and
//!
//! H = Σ ⟨v_o⟩ₖ e^{−jω(k + ½)T_s} / Σ uₖ e^{−jω(k + r)T_s}
//!
//! (the denominator computed, not taken as A·N/2, so a short window's image terms
//! cancel as they do in the numerator).

use nalgebra::Complex;

use super::injection::settled;
use super::sampler::Sampler;
use super::{commensurate, Disturbed, InjectionOptions};
use crate::controller::ControllerSpec;
use crate::error::ModelError;
use crate::steady::SteadyState;
use crate::template::ForwardDesign;

type C64 = Complex<f64>;

const TAU: f64 = 2.0 * std::f64::consts::PI;

/// A closed-loop response to the load or the line at one frequency by injection.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct InputInjection {
    /// The frequency injected (commensurate with the switching period), hertz.
    pub frequency: f64,
    /// Output impedance −⟨v̂_o⟩/î (ohms) for the load, ⟨v̂_o⟩/v̂_in for the line.
    pub response: C64,
    /// Injection amplitude of the reported result, amperes or volts.
    pub amplitude: f64,
    /// Switching periods simulated for this point, all amplitudes.
    pub periods: usize,
}

/// The held input's DFT bin and the output's over one window of `n` periods holding
/// `m` injection periods, the loop carried on from where it stands.
fn window(
    sampler: &mut Sampler,
    input: Disturbed,
    (m, n, start): (usize, usize, usize),
    amplitude: f64,
    r: f64,
) -> Result<(C64, C64), ModelError> {
    let (mut u_bin, mut y_bin) = (C64::new(0.0, 0.0), C64::new(0.0, 0.0));
    let w = TAU * m as f64 / n as f64;
    for k in start..start + n {
        let u = amplitude * (w * k as f64).cos();
        sampler.hold(input, u)?;
        let s = sampler.period_on(0.0)?;
        u_bin += u * C64::from_polar(1.0, -w * (k as f64 + r));
        y_bin += s.mean * C64::from_polar(1.0, -w * (k as f64 + 0.5));
    }
    Ok((u_bin, y_bin))
}

/// The response at a fixed `amplitude`, settled from `steady`: (frequency, H, periods).
fn inject_input_at(
    sampler: &mut Sampler,
    steady: &SteadyState,
    input: Disturbed,
    frequency: f64,
    amplitude: f64,
    opts: &InjectionOptions,
) -> Result<(f64, C64, usize), ModelError> {
    let fs = 1.0 / sampler.period();
    let (m, n) = commensurate(frequency, fs, opts.short_window);
    let duty = sampler.sample(&steady.x, 0.0)?.duty;
    let r = input.reference(duty);
    let sign = match input {
        Disturbed::LoadCurrent => -1.0,
        Disturbed::Line => 1.0,
    };
    sampler.restore(&steady.x)?;
    let estimate = |k: usize| {
        let (u, y) = window(sampler, input, (m, n, k * n), amplitude, r)?;
        Ok(sign * y / u)
    };
    match settled(opts, n, estimate)? {
        Some((h, periods)) => Ok((m as f64 * fs / n as f64, h, periods)),
        None => Err(ModelError::Infeasible(format!(
            "{input:?} by injection at {frequency} Hz: not settled after {} windows of {n} periods",
            opts.max_windows
        ))),
    }
}

/// The closed loop's response to `input` at `frequency` by injection, the amplitude
/// halved from [`InjectionOptions::first_amplitude`] of the input's value (at least
/// 1 A or 1 V) until two successive amplitudes agree. One frequency per call.
pub fn inject_input(
    design: &ForwardDesign,
    spec: &ControllerSpec,
    steady: &SteadyState,
    input: Disturbed,
    frequency: f64,
    opts: &InjectionOptions,
) -> Result<InputInjection, ModelError> {
    let mut sampler = Sampler::new(design, spec)?;
    let mut amplitude = opts.first_amplitude * input.value(design).abs().max(1.0);
    let run = |s: &mut Sampler, a: f64| inject_input_at(s, steady, input, frequency, a, opts);
    let (_, mut last, mut periods) = run(&mut sampler, amplitude)?;
    for _ in 0..opts.max_halvings {
        amplitude *= 0.5;
        let (f, h, p) = run(&mut sampler, amplitude)?;
        periods += p;
        let db = 20.0 * (h.norm() / last.norm()).log10();
        let deg = (h / last).arg().to_degrees();
        if db.abs() <= opts.agree_db && deg.abs() <= opts.agree_deg {
            return Ok(InputInjection {
                frequency: f,
                response: h,
                amplitude,
                periods,
            });
        }
        last = h;
    }
    Err(ModelError::Infeasible(format!(
        "{input:?} by injection at {frequency} Hz: no two amplitudes down to {amplitude:e} \
         agree within {} dB and {}°",
        opts.agree_db, opts.agree_deg
    )))
}
