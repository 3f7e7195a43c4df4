//! Closed-form design figures of the forward converter: what a designer computes on
//! paper, and what the templates are checked against.
//!
//! Sources: R. W. Erickson & D. Maksimović, *Fundamentals of Power Electronics*, 2nd ed.,
//! §6.3.2 (forward converter: conversion ratio, reset-winding duty limit) and ch. 2
//! (inductor volt-second balance, ripple); Faraday's law for the flux swing. The
//! active-clamp relation is volt-second balance on the magnetising inductance.

use crate::template::{ForwardDesign, ResetScheme};

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

/// Where [`DesignFigures`] are evaluated: the drive's limits and the line range.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DesignPoint {
    /// Switching frequency of the main switch, hertz.
    pub frequency: f64,
    /// Highest duty the drive can command, per main-switch period.
    pub max_duty: f64,
    /// Output the loop regulates to, volts; `None` for a fixed duty of `max_duty`.
    pub set_point: Option<f64>,
    /// Lowest input voltage applied, volts.
    pub low_line: f64,
    /// Highest input voltage applied, volts.
    pub high_line: f64,
}

/// The figures a designer works out on paper before simulating, in steady state with
/// ideal switches; diode thresholds are included, winding and switch resistances not.
#[derive(Clone, Debug, PartialEq)]
pub struct DesignFigures {
    /// Turns ratio Ns/Np.
    pub secondary_ratio: f64,
    /// Turns ratio Nr/Np (reset-winding scheme only).
    pub reset_ratio: Option<f64>,
    /// Output voltage: the set point, or the fixed-duty prediction at nominal line, volts.
    pub output_voltage: f64,
    /// Load current at that output voltage, amperes.
    pub load_current: f64,
    /// Duty at nominal line (the source voltage at t = 0), capped at the maximum.
    pub nominal_duty: f64,
    /// Duty needed to hold the set point at low line, uncapped (`None` for a fixed duty).
    pub low_line_duty_needed: Option<f64>,
    /// Highest duty at which the core still resets fully (`None`: the scheme has no
    /// limit below 1). For an RCD clamp this is at low line and maximum duty, with the
    /// clamp voltage from its energy balance.
    pub reset_limit_duty: Option<f64>,
    /// Magnetising current at the end of a maximum-duty on-time at low line, from a
    /// reset core, amperes.
    pub magnetising_peak: f64,
    /// Flux density at the same instant, tesla.
    pub flux_peak: f64,
    /// Output inductor ripple at nominal line, amperes peak to peak.
    pub inductor_ripple: f64,
    /// Output voltage ripple at nominal line, volts peak to peak: the capacitive part
    /// plus the ESR part, added as an upper bound.
    pub output_ripple: f64,
    /// Clamp capacitor voltage above the input, volts, highest over the line range
    /// (clamp schemes only).
    pub clamp_voltage: Option<f64>,
    /// Highest steady drain–source voltage of the main switch over the line range, volts.
    pub drain_stress: f64,
}

/// Duty that gives `vout` from `vin`, and the output a duty gives, from volt-second
/// balance on the output inductor with the rectifier drop `vfr` during the on-time and
/// the freewheel drop `vff` during the off-time:
/// D·(n·Vin − Vfr) − (1 − D)·Vff = Vo.
struct Stage {
    n: f64,
    vfr: f64,
    vff: f64,
}

impl Stage {
    fn duty_for(&self, vin: f64, vout: f64) -> f64 {
        (vout + self.vff) / (self.n * vin - self.vfr + self.vff)
    }

    fn output_at(&self, vin: f64, duty: f64) -> f64 {
        duty * (self.n * vin - self.vfr + self.vff) - self.vff
    }
}

impl DesignFigures {
    /// Figures of `design` at `point`.
    pub fn compute(design: &ForwardDesign, point: &DesignPoint) -> DesignFigures {
        let t = &design.transformer;
        let period = 1.0 / point.frequency;
        let stage = Stage {
            n: t.secondary_turns / t.primary_turns,
            vfr: design.rectifier.vf,
            vff: design.freewheel.vf,
        };
        let vin = design.input.voltage;
        let duty_at = |v: f64| match point.set_point {
            Some(vo) => stage.duty_for(v, vo).clamp(0.0, point.max_duty),
            None => point.max_duty,
        };
        let output_voltage = point
            .set_point
            .unwrap_or_else(|| stage.output_at(vin, point.max_duty).max(0.0));
        let load = &design.load;
        let load_current =
            load.current.unwrap_or(0.0) + load.resistance.map_or(0.0, |r| output_voltage / r);
        let nominal_duty = duty_at(vin);
        let magnetising_peak = magnetising_peak(
            point.low_line,
            point.max_duty,
            period,
            t.magnetising_inductance,
        );
        let inductor_ripple = inductor_ripple(
            output_voltage,
            stage.vff,
            nominal_duty,
            period,
            design.output_inductor.inductance,
        );
        let c = &design.output_capacitor;
        let output_ripple = capacitor_ripple(inductor_ripple, point.frequency, c.capacitance)
            + c.esr * inductor_ripple;
        let reset = ResetFigures::compute(design, point, &duty_at);
        DesignFigures {
            secondary_ratio: stage.n,
            reset_ratio: reset.reset_ratio,
            output_voltage,
            load_current,
            nominal_duty,
            low_line_duty_needed: point.set_point.map(|vo| stage.duty_for(point.low_line, vo)),
            reset_limit_duty: reset.limit,
            magnetising_peak,
            flux_peak: flux_swing(
                point.low_line,
                point.max_duty,
                period,
                t.primary_turns,
                t.core_area,
            ),
            inductor_ripple,
            output_ripple,
            clamp_voltage: reset.clamp_voltage,
            drain_stress: reset.drain_stress,
        }
    }
}

/// The reset scheme's part of the figures.
struct ResetFigures {
    reset_ratio: Option<f64>,
    limit: Option<f64>,
    clamp_voltage: Option<f64>,
    drain_stress: f64,
}

impl ResetFigures {
    fn compute(design: &ForwardDesign, point: &DesignPoint, duty_at: &dyn Fn(f64) -> f64) -> Self {
        let t = &design.transformer;
        let lines = [point.low_line, point.high_line];
        let worst = |f: &dyn Fn(f64) -> f64| lines.iter().map(|&v| f(v)).fold(f64::MIN, f64::max);
        match &design.reset {
            ResetScheme::ResetWinding { .. } => {
                let ratio = t.reset_turns / t.primary_turns;
                ResetFigures {
                    reset_ratio: Some(ratio),
                    limit: Some(reset_winding_duty_limit(ratio)),
                    clamp_voltage: None,
                    drain_stress: reset_winding_drain_voltage(point.high_line, 1.0 / ratio),
                }
            }
            // Both clamp diodes hold the winding at −Vin during reset: a reset winding
            // with Nr = Np, and each switch sees at most the input.
            ResetScheme::TwoSwitch { .. } => ResetFigures {
                reset_ratio: None,
                limit: Some(reset_winding_duty_limit(1.0)),
                clamp_voltage: None,
                drain_stress: point.high_line,
            },
            ResetScheme::RcdClamp { resistance, .. } => {
                let clamp = |v: f64| {
                    let d = duty_at(v);
                    let ipk =
                        magnetising_peak(v, d, 1.0 / point.frequency, t.magnetising_inductance);
                    rcd_clamp_voltage(ipk, t.magnetising_inductance, *resistance, point.frequency)
                        .max(active_clamp_voltage(v, d))
                };
                let ipk_low = magnetising_peak(
                    point.low_line,
                    point.max_duty,
                    1.0 / point.frequency,
                    t.magnetising_inductance,
                );
                let vc_low = rcd_clamp_voltage(
                    ipk_low,
                    t.magnetising_inductance,
                    *resistance,
                    point.frequency,
                );
                ResetFigures {
                    reset_ratio: None,
                    limit: Some(vc_low / (point.low_line + vc_low)),
                    clamp_voltage: Some(worst(&clamp)),
                    drain_stress: worst(&|v| v + clamp(v)),
                }
            }
            ResetScheme::ActiveClamp { .. } => {
                let clamp = |v: f64| active_clamp_voltage(v, duty_at(v));
                ResetFigures {
                    reset_ratio: None,
                    limit: None,
                    clamp_voltage: Some(worst(&clamp)),
                    drain_stress: worst(&|v| v + clamp(v)),
                }
            }
        }
    }
}

/// Steady clamp voltage of an RCD clamp above the input, volts, when each cycle's
/// magnetising energy ½·Lm·Ipk² goes into the clamp and its resistor dissipates it:
/// Vc²/R = ½·Lm·Ipk²·f (energy balance; leakage energy neglected).
pub fn rcd_clamp_voltage(ipk: f64, lm: f64, r: f64, frequency: f64) -> f64 {
    ipk * (0.5 * lm * r * frequency).sqrt()
}

#[cfg(test)]
mod tests {
    //! The demo design (24 V, Np:Ns:Nr = 12:9:12, Lm 200 µH, Ae 40 mm², 15 µH, 220 µF
    //! with 20 mΩ ESR, 0.4 V diodes, 1.25 Ω) worked by hand at 150 kHz, 5 V set point
    //! and 45 % maximum duty. Sources: Erickson & Maksimović, *Fundamentals of Power
    //! Electronics*, 2nd ed., §2.2 (inductor volt-second balance), §2.3 (ripple), §6.3.2
    //! (forward converter, reset-winding duty limit); Faraday's law for B. Tolerance
    //! 1e-12 relative: the same closed forms in another order, so only rounding differs.

    use super::*;
    use crate::demo_design::demo_design;
    use crate::template::ResetScheme;

    fn close(got: f64, want: f64) {
        assert!(
            (got - want).abs() <= 1e-12 * want.abs(),
            "got {got}, want {want}"
        );
    }

    fn point(set_point: Option<f64>, max_duty: f64) -> DesignPoint {
        DesignPoint {
            frequency: 150e3,
            max_duty,
            set_point,
            low_line: 24.0,
            high_line: 24.0,
        }
    }

    #[test]
    fn reset_winding_demo_by_hand() {
        let f = DesignFigures::compute(&demo_design(), &point(Some(5.0), 0.45));
        close(f.secondary_ratio, 0.75);
        close(f.reset_ratio.unwrap(), 1.0);
        // D·(n·Vin − Vfr) − (1 − D)·Vff = Vo with equal drops: D = (5 + 0.4)/(0.75·24).
        close(f.nominal_duty, 5.4 / 18.0);
        close(f.low_line_duty_needed.unwrap(), 5.4 / 18.0);
        // 1/(1 + Nr/Np) with Nr = Np.
        close(f.reset_limit_duty.unwrap(), 0.5);
        // Vin·D·T/Lm and Vin·D·T/(Np·Ae) at the 45 % clamp.
        close(f.magnetising_peak, 24.0 * 0.45 / 150e3 / 200e-6);
        close(f.flux_peak, 24.0 * 0.45 / 150e3 / (12.0 * 40e-6));
        // (Vo + Vf)(1 − D)T/L, then ΔI/(8fC) + ESR·ΔI.
        let ripple = 5.4 * 0.7 / 150e3 / 15e-6;
        close(f.inductor_ripple, ripple);
        close(
            f.output_ripple,
            ripple / (8.0 * 150e3 * 220e-6) + 0.02 * ripple,
        );
        close(f.load_current, 4.0);
        // Vin·(1 + Np/Nr).
        close(f.drain_stress, 48.0);
        assert_eq!(f.clamp_voltage, None);
    }

    #[test]
    fn fixed_duty_predicts_the_output_by_volt_second_balance() {
        let f = DesignFigures::compute(&demo_design(), &point(None, 0.3));
        // 0.3·(0.75·24 − 0.4) − 0.7·0.4 = 5.0 V.
        close(f.output_voltage, 0.3 * (18.0 - 0.4) - 0.7 * 0.4);
        assert_eq!(f.low_line_duty_needed, None);
    }

    #[test]
    fn rcd_clamp_from_energy_balance() {
        let mut d = demo_design();
        d.reset = ResetScheme::RcdClamp {
            diode: crate::demo_design::reset_diode(),
            resistance: 1e3,
            capacitor: crate::components::Capacitor {
                capacitance: 100e-9,
                esr: 0.0,
            },
            initial_voltage: 0.0,
        };
        let f = DesignFigures::compute(&d, &point(Some(5.0), 0.45));
        // Vc²/R = ½·Lm·Ipk²·f at the regulated duty 0.3: Ipk = 24·0.3·T/Lm = 0.24 A.
        let vc = 0.24 * (0.5 * 200e-6 * 1e3 * 150e3_f64).sqrt();
        close(f.clamp_voltage.unwrap(), vc);
        close(f.drain_stress, 24.0 + vc);
        // Full reset needs Vc·(1 − D) ≥ Vin·D, with Vc from the 0.36 A peak at 45 %.
        let vc_max = 0.36 * (0.5 * 200e-6 * 1e3 * 150e3_f64).sqrt();
        close(f.reset_limit_duty.unwrap(), vc_max / (24.0 + vc_max));
    }

    #[test]
    fn active_clamp_and_two_switch_stress() {
        let mut d = demo_design();
        d.reset = ResetScheme::ActiveClamp {
            aux_switch: crate::demo_design::primary_switch(),
            capacitor: crate::components::Capacitor {
                capacitance: 470e-9,
                esr: 0.0,
            },
            initial_voltage: 0.0,
        };
        let f = DesignFigures::compute(&d, &point(None, 0.3));
        // Volt-second balance on Lm: Vc = Vin·D/(1 − D); the drain sees Vin/(1 − D).
        close(f.clamp_voltage.unwrap(), 24.0 * 0.3 / 0.7);
        close(f.drain_stress, 24.0 / 0.7);
        assert_eq!(f.reset_limit_duty, None);
        d.reset = ResetScheme::TwoSwitch {
            high_side: crate::demo_design::primary_switch(),
            clamp_diode: crate::demo_design::reset_diode(),
        };
        let f = DesignFigures::compute(&d, &point(None, 0.3));
        // The clamp diodes hold each switch at the input: a reset winding with Nr = Np.
        close(f.drain_stress, 24.0);
        close(f.reset_limit_duty.unwrap(), 0.5);
    }
}

crate::measure::catalogue::figures! {
    SECONDARY_RATIO = "design.turns_ratio.secondary", "1", Number, Neither, Files,
        "turns ratio Ns/Np", "Secondary over primary turns.";
    RESET_RATIO = "design.turns_ratio.reset", "1", Number, Neither, Files,
        "turns ratio Nr/Np", "Reset-winding over primary turns (reset-winding scheme).";
    OUTPUT_VOLTAGE = "design.output_voltage", "V", Number, Neither, Files,
        "output voltage", "The set point, or the fixed duty's output at nominal line.";
    LOAD_CURRENT = "design.load_current", "A", Number, Neither, Files,
        "load current", "Load current at that output voltage.";
    NOMINAL_DUTY = "design.duty.nominal", "1", Fraction, Neither, Files,
        "duty at nominal line", "Duty at the input voltage at t = 0, capped at the maximum.";
    LOW_LINE_DUTY = "design.duty.low_line_needed", "1", Fraction, Higher, Files,
        "duty needed at low line", "Duty that holds the set point at low line, uncapped.";
    RESET_LIMIT_DUTY = "design.duty.reset_limit", "1", Fraction, Lower, Files,
        "reset duty limit", "Highest duty at which the core still resets fully.";
    MAGNETISING_PEAK = "design.magnetising_peak", "A", Number, Higher, Files,
        "magnetising current peak", "At the end of a maximum-duty on-time at low line, from a reset core.";
    FLUX_PEAK = "design.flux_peak", "T", Number, Higher, Files,
        "flux density peak", "At the end of a maximum-duty on-time at low line.";
    INDUCTOR_RIPPLE = "design.inductor_ripple", "A", Number, Higher, Files,
        "inductor ripple (p-p)", "Output inductor ripple at nominal line.";
    OUTPUT_RIPPLE = "design.output_ripple", "V", Number, Higher, Files,
        "output ripple (p-p)", "Capacitive plus ESR ripple at nominal line, an upper bound.";
    CLAMP_VOLTAGE = "design.clamp_voltage", "V", Number, Higher, Files,
        "clamp voltage", "Clamp capacitor voltage above the input, highest over the line range.";
    DRAIN_STRESS = "design.drain_stress", "V", Number, Higher, Files,
        "drain stress", "Highest steady drain-source voltage of the main switch over the line range.";
}

impl DesignFigures {
    /// As catalogue figures; a figure the scheme does not have is left out, one whose
    /// closed form has no finite value says so.
    pub fn figures(&self) -> Vec<crate::measure::Figure> {
        let all: [(&'static crate::measure::FigureDef, Option<f64>); 13] = [
            (&SECONDARY_RATIO, Some(self.secondary_ratio)),
            (&RESET_RATIO, self.reset_ratio),
            (&OUTPUT_VOLTAGE, Some(self.output_voltage)),
            (&LOAD_CURRENT, Some(self.load_current)),
            (&NOMINAL_DUTY, Some(self.nominal_duty)),
            (&LOW_LINE_DUTY, self.low_line_duty_needed),
            (&RESET_LIMIT_DUTY, self.reset_limit_duty),
            (&MAGNETISING_PEAK, Some(self.magnetising_peak)),
            (&FLUX_PEAK, Some(self.flux_peak)),
            (&INDUCTOR_RIPPLE, Some(self.inductor_ripple)),
            (&OUTPUT_RIPPLE, Some(self.output_ripple)),
            (&CLAMP_VOLTAGE, self.clamp_voltage),
            (&DRAIN_STRESS, Some(self.drain_stress)),
        ];
        all.into_iter()
            .filter_map(|(d, v)| v.map(|v| d.of(v)))
            .map(|f| match f.has_value() {
                true => f,
                false => f.because("its closed form has no finite value for this design"),
            })
            .collect()
    }
}
