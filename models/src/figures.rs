//! Closed-form design figures of the forward converter: what a designer computes on
//! paper, and what the templates are checked against.
//!
//! Sources: R. W. Erickson & D. Maksimović, *Fundamentals of Power Electronics*, 2nd ed.,
//! §6.3.2 (forward converter: conversion ratio, reset-winding duty limit) and ch. 2
//! (inductor volt-second balance, ripple); Faraday's law for the flux swing. The
//! active-clamp relation is volt-second balance on the magnetising inductance.

/// Ideal CCM duty for `vout` from `vin` with turns ratio Ns/Np: Vo = D·Vin·Ns/Np.
pub fn ideal_duty(vin: f64, vout: f64, ns_over_np: f64) -> f64 {
    vout / (vin * ns_over_np)
}

/// Highest duty at which a reset winding still resets the core each cycle:
/// D ≤ 1/(1 + Nr/Np).
pub fn reset_winding_duty_limit(nr_over_np: f64) -> f64 {
    1.0 / (1.0 + nr_over_np)
}

/// Magnetising current reached at the end of the on-time from zero, amperes:
/// Vin·D·T/Lm.
pub fn magnetising_peak(vin: f64, duty: f64, period: f64, lm: f64) -> f64 {
    vin * duty * period / lm
}

/// Flux-density swing over the on-time, tesla: ΔB = Vin·D·T/(Np·Ae) (Faraday's law).
pub fn flux_swing(vin: f64, duty: f64, period: f64, np: f64, ae: f64) -> f64 {
    vin * duty * period / (np * ae)
}

/// Reset interval of a reset winding, seconds: (Nr/Np)·D·T.
pub fn reset_time(duty: f64, period: f64, nr_over_np: f64) -> f64 {
    nr_over_np * duty * period
}

/// Drain voltage while the reset winding conducts, volts: Vin·(1 + Np/Nr).
pub fn reset_winding_drain_voltage(vin: f64, np_over_nr: f64) -> f64 {
    vin * (1.0 + np_over_nr)
}

/// Clamp capacitor voltage of a high-side active clamp, volts: Vin·D/(1 − D), from
/// volt-second balance on the magnetising inductance.
pub fn active_clamp_voltage(vin: f64, duty: f64) -> f64 {
    vin * duty / (1.0 - duty)
}

/// Output inductor peak-to-peak ripple, amperes: (Vo + Vf)(1 − D)·T/L.
pub fn inductor_ripple(vout: f64, vf: f64, duty: f64, period: f64, l: f64) -> f64 {
    (vout + vf) * (1.0 - duty) * period / l
}

/// Output voltage ripple of an ideal capacitor fed a triangular ripple current,
/// volts peak-to-peak: ΔI/(8·f·C).
pub fn capacitor_ripple(ripple_current: f64, frequency: f64, c: f64) -> f64 {
    ripple_current / (8.0 * frequency * c)
}

/// Quarter period of the resonance of L with C, seconds: (π/2)·√(L·C).
pub fn quarter_resonance(l: f64, c: f64) -> f64 {
    std::f64::consts::FRAC_PI_2 * (l * c).sqrt()
}
