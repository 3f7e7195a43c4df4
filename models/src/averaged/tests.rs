//! The averaged model against closed forms derived by hand from the same design
//! numbers; each check names its source and tolerance.

use nalgebra::Complex;

use super::*;
use crate::components::Capacitor;
use crate::controller::Compensation;
use crate::demo_design::{demo_controller, demo_design};

const TAU: f64 = 2.0 * std::f64::consts::PI;

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs()
}

/// DC: the three relations the operating point must satisfy, each checked on the
/// equilibrium the engine's nodal matrices give (not on the library's own solver):
/// - stage, Erickson & Maksimović, *Fundamentals of Power Electronics*, 2nd ed.,
///   §6.3.2 (forward: buck from n·Vin) with conduction drops per ch. 3:
///   Vo = D·(n·Vc_in − Vr) − (1 − D)·Vf − I_L·(D·(rd_r + n²·Rsw) + (1 − D)·rd_f + DCR),
///   I_L = Vo/R + Vo/(Rtop + Rbot), and with an input capacitor Vc_in = Vin − Rin·D·n·I_L
///   (averaged input current D·n·I_L, ibid. §7.4), else Rin switched: n²·Rin in the
///   on-state path;
/// - amplifier at DC (capacitors open, no current through Zi, so v− = Vref):
///   Vc = A0·(Vo·Rbot/(Rtop + Rbot) − Vref);
/// - modulator (this project's falling ramp): D = (peak − Vc)/(peak − valley).
///
/// Tolerances: the only elements the closed forms leave out are the amplifier's clamp
/// diodes, blocking with 1 TΩ to 0 V and 3.5 V: they inject at most
/// (3.5 V / 1 TΩ)·1 MΩ = 3.5 µV into the amplifier's internal node, 1.5e-6 of Vc, so Vc
/// is held to 2e-6 relative; that moves Vo by 3.5 µV/A0/k < 1e-9 V, so the stage and
/// modulator relations are held to 1e-9 relative (round-off otherwise).
#[test]
fn dc_operating_point_matches_closed_forms() {
    let spec = demo_controller();
    let mut stiff_rin = demo_design();
    stiff_rin.input.resistance = 0.2;
    let mut bulk = stiff_rin.clone();
    bulk.input.bulk = Some(Capacitor {
        capacitance: 100e-6,
        esr: 0.05,
    });
    for (name, design) in [("demo", demo_design()), ("rin", stiff_rin), ("bulk", bulk)] {
        let m = AveragedModel::new(&design, &spec).unwrap();
        let (vo, il) = (m.dc(Output::OutputVoltage), m.dc(Output::InductorCurrent));
        let (vc, d) = (m.dc(Output::ControlVoltage), m.dc(Output::Duty));
        let t = &design.transformer;
        let n = t.secondary_turns / t.primary_turns;
        let v = &spec.voltage_loop;
        let r_load = design.load.resistance.unwrap();
        let il_cf = vo / r_load + vo / (v.divider_top + v.divider_bottom);
        let (rin, decoupled) = (design.input.resistance, design.input.bulk.is_some());
        let vin_conv = design.input.voltage - if decoupled { rin * d * n * il_cf } else { 0.0 };
        let r_primary = design.switch.r_on + if decoupled { 0.0 } else { rin };
        let (r, f) = (&design.rectifier, &design.freewheel);
        let vo_cf = d * (n * vin_conv - r.vf)
            - (1.0 - d) * f.vf
            - il_cf
                * (d * (r.rd + n * n * r_primary) + (1.0 - d) * f.rd + design.output_inductor.dcr);
        let k = v.divider_bottom / (v.divider_top + v.divider_bottom);
        let vc_cf = v.amplifier.dc_gain * (k * vo - v.reference);
        let o = &spec.oscillator;
        let d_cf = (o.peak - vc) / (o.peak - o.valley);
        let errs = [rel(vo, vo_cf), rel(il, il_cf), rel(vc, vc_cf), rel(d, d_cf)];
        println!(
            "{name}: Vo {vo:.6} V (closed form {vo_cf:.6}), I_L {il:.5} A, Vc {vc:.5} V, D {d:.5}; \
             rel. errors {errs:?}; set point {:.4} V",
            v.set_point()
        );
        let tolerances = [1e-9, 1e-9, 2e-6, 1e-9];
        assert!(
            errs.iter().zip(tolerances).all(|(e, t)| *e < t),
            "{name}: {errs:?}"
        );
        // The library's own solver finds the same point.
        assert!(rel(m.operating_point.duty, d) < 1e-9);
        assert!(rel(m.operating_point.output_voltage, vo) < 1e-9);
    }
}

/// Closed-form loop gain T = Gvd·H·Gc/VM (Erickson & Maksimović, 2nd ed., §9.1; PWM
/// gain 1/VM §7.6) with:
/// - Gvd = K·Zo/(Zo + Rs + sL), the averaged buck's duty-to-output transfer function
///   written as an impedance divider (ibid. ch. 8), K = ∂⟨v_rect⟩/∂d =
///   n·Vin − Vr + Vf − (Ron − Rf)·I_L, Rs = D·Ron + (1 − D)·Rf + DCR,
///   Zo = R ‖ (Rtop + Rbot) ‖ (ESR + 1/sC);
/// - H = Rbot/(Rtop + Rbot);
/// - Gc = vc/fb of a non-inverting stage with finite open-loop gain
///   a(s) = A0/(1 + s·A0/ωGBW) (single-pole op-amp, Sedra & Smith, *Microelectronic
///   Circuits*, op-amp frequency response): Gc = (1 + Zf/Zi)/(1 + (1 + Zf/Zi)/a), with
///   the type III network Zi = R1 ‖ (R3 + 1/sC3), Zf = (R2 + 1/sC1) ‖ 1/sC2.
///
/// Tolerance 1e-6 relative: the clamp diodes' 1 TΩ leakage changes a(s) by ≈ 2e-6 of
/// its value only where |a| is large; elsewhere the difference is round-off.
#[test]
fn loop_gain_matches_closed_form_and_crossover_is_reported() {
    let (design, spec) = (demo_design(), demo_controller());
    let m = AveragedModel::new(&design, &spec).unwrap();
    let op = &m.operating_point;
    let Compensation::TypeIII {
        r1,
        r2,
        r3,
        c1,
        c2,
        c3,
    } = spec.voltage_loop.compensation.components().unwrap()
    else {
        panic!("demo compensation is type III");
    };
    let t = &design.transformer;
    let n = t.secondary_turns / t.primary_turns;
    let (r, f) = (&design.rectifier, &design.freewheel);
    let ron = r.rd + n * n * design.switch.r_on;
    let d = op.duty;
    let k_d = n * design.input.voltage - r.vf + f.vf - (ron - f.rd) * op.inductor_current;
    let rs = d * ron + (1.0 - d) * f.rd + design.output_inductor.dcr;
    let v = &spec.voltage_loop;
    let rdiv = v.divider_top + v.divider_bottom;
    let amp = &v.amplifier;
    let vm = spec.oscillator.peak - spec.oscillator.valley;
    let closed_form = |fr: f64| {
        let s = Complex::new(0.0, TAU * fr);
        let one = Complex::new(1.0, 0.0);
        let par = |a: Complex<f64>, b: Complex<f64>| a * b / (a + b);
        let cap = &design.output_capacitor;
        let zc = one * cap.esr + one / (s * cap.capacitance);
        let zo = par(par(one * design.load.resistance.unwrap(), one * rdiv), zc);
        let gvd = zo * k_d / (zo + rs + s * design.output_inductor.inductance);
        let zi = par(one * r1, one * r3 + one / (s * c3));
        let zf = par(one * r2 + one / (s * c1), one / (s * c2));
        let a = one * amp.dc_gain / (one + s * amp.dc_gain / (TAU * amp.gain_bandwidth));
        let ideal = one + zf / zi;
        let gc = ideal / (one + ideal / a);
        gvd * (v.divider_bottom / rdiv) * gc / vm
    };
    for fr in [10.0, 100.0, 1e3, 2.8e3, 1e4, 1.5e4, 3e4, 7.5e4] {
        let (tm, tc) = (m.loop_gain(fr).unwrap(), closed_form(fr));
        let e = (tm - tc).norm() / tc.norm();
        println!(
            "T({fr:>7} Hz): model {:.5} ∠{:.3}°, closed form {:.5} ∠{:.3}°, rel. error {e:.1e}",
            tm.norm(),
            tm.arg().to_degrees(),
            tc.norm(),
            tc.arg().to_degrees()
        );
        assert!(e < 1e-6, "T at {fr} Hz: {e:.2e}");
    }
    let x = m.crossover().unwrap();
    let tc = closed_form(x.frequency);
    let pm_cf = 180.0 + tc.arg().to_degrees();
    // The straight-line asymptotes the design was made with (ibid. §8.1, §9.5): between
    // the compensator's zeros and poles, above the LC resonance f0,
    // |T| ≈ (K·H/VM)·(f0/f)²·(fi·f/(fz1·fz2)), so fc ≈ K·H·f0²·fi/(VM·fz1·fz2).
    let f0 = 1.0
        / (TAU * (design.output_inductor.inductance * design.output_capacitor.capacitance).sqrt());
    let Compensation::PolesZeros {
        integrator_hz,
        zeros_hz,
        ..
    } = &v.compensation
    else {
        panic!("demo compensation is given as poles and zeros");
    };
    let fc_asymptotic = k_d * 0.5 * f0 * f0 * integrator_hz / (vm * zeros_hz[0] * zeros_hz[1]);
    println!(
        "crossover {:.0} Hz, phase margin {:.1}° (closed form |T| = {:.6}, PM {pm_cf:.1}°); \
         design intent 15 kHz, straight-line asymptote estimate {fc_asymptotic:.0} Hz",
        x.frequency,
        x.phase_margin,
        tc.norm()
    );
    // |T| = 1 there by the closed form too, and the phases agree (tolerances as above).
    assert!((tc.norm() - 1.0).abs() < 1e-6);
    assert!((x.phase_margin - pm_cf).abs() < 1e-4);
}

/// Linearisation is exact to first order (Erickson & Maksimović, 2nd ed., §7.2.7): the
/// linear model's settled response to a 1 A load step must equal the difference of the
/// two nonlinear operating points up to the dropped second-order term
/// ΔD·ΔI_L·(Ron − Rf) ≈ 0.0016 · 1 A · 0.029 Ω ≈ 4.6e-5 V of rectifier-node voltage.
/// The loop absorbs it in the duty, which then errs by that over K ≈ 17.6 V: ≈ 2.6e-6,
/// held to 1e-5; the output errs by it over the DC loop gain (≈ 4.5e4): ≈ 1e-9 V, held
/// to 1e-8 V.
#[test]
fn settled_step_equals_new_operating_point() {
    let (design, spec) = (demo_design(), demo_controller());
    let m = AveragedModel::new(&design, &spec).unwrap();
    let mut loaded = design.clone();
    loaded.load.current = Some(1.0);
    let m1 = AveragedModel::new(&loaded, &spec).unwrap();
    // Long enough for the slowest closed-loop pole (the amplifier's finite-gain pole,
    // ≈ 100 Hz open loop, much faster closed) to settle.
    let r = m.load_step(1.0, 0.0, 0.2, 1e-4).unwrap();
    let end = r.values.last().unwrap();
    for (o, name, tol) in [
        (Output::OutputVoltage, "Vo", 1e-8),
        (Output::Duty, "D", 1e-5),
    ] {
        let (lin, new) = (end[o as usize], m1.dc(o));
        println!("{name}: linear model {lin:.9}, new operating point {new:.9}");
        assert!((lin - new).abs() < tol, "{name}");
    }
}

/// A ramp input is the running mean of shifted steps (superposition, any linear
/// time-invariant system): y_ramp(t) = (1/te)·∫_{t−te}^{t} y_step(τ) dτ for a ramp of
/// duration te. Checked at times inside and after the ramp with a step response on a
/// grid 1000× finer than te, integrated by the trapezoidal rule (error ≈ 1e-7 of the
/// step's excursion). Tolerance 1e-6 V against a ≈ 40 mV excursion.
#[test]
fn ramp_response_is_the_running_mean_of_the_step_response() {
    let m = AveragedModel::new(&demo_design(), &demo_controller()).unwrap();
    let te = 2e-6;
    let dt = te / 1000.0;
    let step = m.load_step(1.0, 0.0, 40e-6, dt).unwrap();
    let ramp = m.load_step(1.0, 1.0 / te, 40e-6, dt).unwrap();
    let vs = step.output(Output::OutputVoltage);
    let vr = ramp.output(Output::OutputVoltage);
    let v0 = m.dc(Output::OutputVoltage);
    for k in [500_usize, 1000, 1500, 2000, 10_000, 19_000] {
        let lo = k.saturating_sub(1000);
        let mut area = 0.0;
        for j in lo..k {
            area += 0.5 * (vs[j] + vs[j + 1] - 2.0 * v0) * dt;
        }
        // Before the step (τ < 0) the step response is zero.
        let expect = v0 + area / te;
        println!(
            "t = {:.2} µs: ramp {:.7}, running mean {expect:.7}",
            k as f64 * dt * 1e6,
            vr[k]
        );
        assert!((vr[k] - expect).abs() < 1e-6, "at sample {k}");
    }
}

/// A centred one-period mean of a + b·sin(2πt/T) is a: the trapezoidal rule over a
/// whole period of a periodic function is exact up to aliasing (Trefethen & Weideman,
/// "The exponentially convergent trapezoidal rule", SIAM Review 56(3), 2014); with 64
/// samples per period only round-off is left. Tolerance 1e-12.
#[test]
fn period_average_removes_a_periodic_ripple() {
    let period = 1e-5;
    let time: Vec<f64> = (0..=640).map(|k| k as f64 * period / 64.0).collect();
    let value: Vec<f64> = time
        .iter()
        .map(|t| 5.0 + 0.3 * (TAU * t / period).sin())
        .collect();
    let (t, v) = period_average(&time, &value, period);
    assert_eq!(t.len(), 640 - 64 + 1);
    assert!(v.iter().all(|x| (x - 5.0).abs() < 1e-12));
}

/// v = −e^(−t/τ) settling to 0 leaves the band ±b for the last time at t = τ·ln(1/b)
/// (exact); linear interpolation between
/// samples 1e-3·τ apart errs by < 1e-6·τ. Peak is the first sample, −1.
#[test]
fn transient_figures_of_an_exponential() {
    let tau = 1e-4;
    let time: Vec<f64> = (0..=10_000).map(|k| k as f64 * tau / 1000.0).collect();
    let value: Vec<f64> = time.iter().map(|t| -(-t / tau).exp()).collect();
    let x = transient(&time, &value, 0.0, 0.0, 0.0, 0.01);
    assert_eq!(x.peak_deviation, -1.0);
    assert_eq!(x.peak_time, 0.0);
    let want = tau * 100f64.ln();
    let got = x.recovery_time.unwrap();
    assert!((got - want).abs() < 1e-6 * tau, "{got} vs {want}");
}
