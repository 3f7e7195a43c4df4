//! The loop gain by injection into the switching simulation (method (b),
//! [`stepflux_models::loopgain::inject`]) against the sampled-data linearisation of the
//! same loop (method (a), [`stepflux_models::loopgain::sampled_model`]) on the demo.
//!
//! Both describe the same sampler (the comparator at turn-off) and the same break point,
//! so they must agree wherever the injection is linear: (b) runs the nonlinear switching
//! loop with a finite sinusoid and extracts its Fourier component, (a) differentiates
//! the period map. Their difference is (b)'s residual nonlinearity and settling error
//! plus (a)'s finite-difference error.

use nalgebra::Complex;
use stepflux_models::demo_design::{demo_controller, demo_design};
use stepflux_models::loopgain::{
    inject, inject_at, loop_map, sampled_model, InjectionOptions, LinearOptions, SampledModel,
};
use stepflux_models::steady::SteadyState;

fn db(c: Complex<f64>) -> f64 {
    20.0 * c.norm().log10()
}

fn demo() -> (SteadyState, SampledModel) {
    sampled_model(
        &demo_design(),
        &demo_controller(),
        &LinearOptions::default(),
    )
    .unwrap()
}

/// (b) − (a) in dB and degrees at `fraction` of fs.
fn gap(steady: &SteadyState, a: &SampledModel, fraction: f64) -> (f64, f64, f64) {
    let spec = demo_controller();
    let mut map = loop_map(&demo_design(), &spec).unwrap();
    let fs = 1.0 / a.period;
    let b = inject(
        &mut map,
        &spec,
        steady,
        fraction * fs,
        &InjectionOptions::default(),
    )
    .unwrap();
    let ta = a.at(b.frequency).unwrap().loop_gain;
    (
        b.frequency,
        db(b.loop_gain) - db(ta),
        (b.loop_gain / ta).arg().to_degrees(),
    )
}

/// Up to fs/4 within 0.5 dB and 3°, up to fs/2 within 1 dB and 5° (the issue's
/// tolerances: near fs/2 the injected sinusoid's harmonics alias onto it and the
/// loop gain is small, so the extraction is less clean there). Frequencies: below
/// crossover, near crossover (about fs/9 on the demo), fs/4, and two towards fs/2.
#[test]
fn injection_agrees_with_the_sampled_data_model() {
    let (steady, a) = demo();
    for (fraction, tol_db, tol_deg) in [
        (0.01, 0.5, 3.0),
        (0.1, 0.5, 3.0),
        (0.25, 0.5, 3.0),
        (0.4, 1.0, 5.0),
        (0.5, 1.0, 5.0),
    ] {
        let (f, dm, dp) = gap(&steady, &a, fraction);
        eprintln!("{f} Hz: {dm} dB {dp} deg");
        assert!(
            dm.abs() <= tol_db && dp.abs() <= tol_deg,
            "{f} Hz: {dm} dB, {dp}°"
        );
    }
}

/// Linearity (the test): over a 4× range of amplitudes, from the size the
/// automatic search settles on upwards, |T| moves by at most 0.2 dB (and the phase by
/// at most 1°, the same relative size). Near crossover, where the duty swing per
/// volt of injection is largest.
#[test]
fn injection_is_independent_of_amplitude() {
    let (steady, a) = demo();
    let spec = demo_controller();
    let mut map = loop_map(&demo_design(), &spec).unwrap();
    let opts = InjectionOptions::default();
    let f = 0.1 / a.period;
    let chosen = inject(&mut map, &spec, &steady, f, &opts)
        .unwrap()
        .amplitude;
    let mut t = |amp: f64| {
        inject_at(&mut map, &spec, &steady, f, amp, &opts)
            .unwrap()
            .1
    };
    let base = t(chosen);
    for k in [2.0, 4.0] {
        let tk = t(k * chosen);
        let (dm, dp) = (db(tk) - db(base), (tk / base).arg().to_degrees());
        eprintln!("x{k}: {dm} dB {dp} deg (amplitude {chosen} V)");
        assert!(
            dm.abs() <= 0.2 && dp.abs() <= 1.0,
            "{k}× {chosen} V: {dm} dB, {dp}°"
        );
    }
}
