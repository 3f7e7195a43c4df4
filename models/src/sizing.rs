//! First-cut sizing of a single-switch or two-switch forward converter from its
//! specification, by the textbook relations of Erickson & Maksimović, *Fundamentals of
//! Power Electronics* (2nd ed.): the forward converter in §6.3.2 (conversion ratio
//! `V = (Ns/Np)·D·Vg`, reset-limited duty `Dmax = 1/(1 + Nr/Np)`), the small-ripple
//! inductor and capacitor ripple of a buck-derived output filter (§2.2, §2.5), the
//! pulse-width modulator gain `1/VM` (§7.3) and the voltage-mode loop shaped by a
//! PID-like (type III) compensator whose two zeros sit at the LC resonance (§9.5.4).
//! Arithmetic only: each choice comes with the reason a designer reads beside it.

/// How the core is reset.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ResetScheme {
    /// A reset winding of as many turns as the primary (duty limit 50 %).
    ResetWinding,
    /// Two switches and two clamp diodes to the input (duty limit 50 %).
    TwoSwitch,
}

/// What the converter must do.
#[derive(Clone, Debug, PartialEq)]
pub struct SizingSpec {
    /// Lowest input voltage (V).
    pub vin_min: f64,
    /// Highest input voltage (V).
    pub vin_max: f64,
    /// Output voltage (V).
    pub vout: f64,
    /// Full-load output current (A).
    pub iout: f64,
    /// Switching frequency (Hz).
    pub frequency: f64,
    /// Reset scheme.
    pub reset: ResetScheme,
    /// Largest output ripple, peak to peak (V).
    pub ripple: f64,
}

/// Fixed parts the sizing assumes (common practice for a first cut; the designer
/// replaces them by the chosen parts).
pub mod assumed {
    /// Output diode forward drop (V), a Schottky rectifier.
    pub const DIODE_VF: f64 = 0.4;
    /// Ferrite saturation flux density (T) (from memory: power ferrites at 100 °C).
    pub const BSAT: f64 = 0.3;
    /// Core effective area (m²).
    pub const CORE_AREA: f64 = 40e-6;
    /// Oscillator ramp valley and peak (V); VM = peak − valley.
    pub const RAMP: (f64, f64) = (1.0, 3.0);
    /// Voltage reference (V).
    pub const REFERENCE: f64 = 2.5;
    /// Divider bottom resistor (Ω).
    pub const DIVIDER_BOTTOM: f64 = 10e3;
    /// Compensator input resistor (Ω).
    pub const R1: f64 = 10e3;
}

/// The controller's duty limit: below the reset limit of 50 % (§6.3.2) with room
/// for the reset to finish.
pub const MAX_DUTY: f64 = 0.45;
/// Duty at low line and full load, leaving headroom under [`MAX_DUTY`] for the loop.
const LOW_LINE_DUTY: f64 = 0.40;
/// Peak flux density at the duty limit and high line, as a fraction of Bsat.
const FLUX_FRACTION: f64 = 0.5;
/// Magnetising current peak as a fraction of the reflected load current.
const MAG_FRACTION: f64 = 0.1;
/// Inductor ripple, peak to peak, as a fraction of the load current.
const INDUCTOR_RIPPLE_FRACTION: f64 = 0.3;

/// A sized design: component values in SI units and, per scenario field, why.
#[derive(Clone, Debug, PartialEq)]
pub struct Sized {
    /// Primary turns Np.
    pub primary_turns: f64,
    /// Secondary turns Ns.
    pub secondary_turns: f64,
    /// Reset winding turns Nr (reset-winding scheme only).
    pub reset_turns: Option<f64>,
    /// Magnetising inductance (H).
    pub magnetising_inductance: f64,
    /// Output inductance (H).
    pub inductance: f64,
    /// Output inductor saturation current (A).
    pub saturation_current: f64,
    /// Output capacitance (F).
    pub capacitance: f64,
    /// Output capacitor ESR (Ω).
    pub esr: f64,
    /// Nominal input voltage simulated (V): the middle of the range.
    pub vin_nominal: f64,
    /// Load resistance (Ω).
    pub load_resistance: f64,
    /// Switch voltage rating (V).
    pub switch_rating: f64,
    /// Output diode reverse rating (V).
    pub diode_rating: f64,
    /// Divider top resistor (Ω).
    pub divider_top: f64,
    /// Current-limit threshold on the inductor current (A).
    pub current_limit: f64,
    /// Compensator integrator unity-gain frequency (Hz).
    pub integrator: f64,
    /// Compensator zeros (Hz).
    pub zeros: [f64; 2],
    /// Compensator poles (Hz).
    pub poles: [f64; 2],
    /// Loop crossover aimed at (Hz).
    pub crossover: f64,
    /// LC resonance (Hz).
    pub resonance: f64,
    /// Expected inductor ripple, peak to peak (A).
    pub inductor_ripple: f64,
    /// Scenario field path → the reason for its value.
    pub notes: Vec<(String, String)>,
}

/// Why a specification cannot be sized.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum SizingError {
    /// A value out of its range.
    #[error("{field} = {value}: {allowed}")]
    OutOfRange {
        /// The specification field.
        field: &'static str,
        /// The value given.
        value: f64,
        /// What is allowed.
        allowed: &'static str,
    },
}

fn positive(field: &'static str, value: f64) -> Result<(), SizingError> {
    match value.is_finite() && value > 0.0 {
        true => Ok(()),
        false => Err(SizingError::OutOfRange {
            field,
            value,
            allowed: "must be a positive finite number",
        }),
    }
}

/// The smallest "nice" rating (1, 1.5, 2, 3, 4, 6, 8 × a power of ten) at or above `v`.
pub fn rating_above(v: f64) -> f64 {
    let decade = 10f64.powf(v.log10().floor());
    [1.0, 1.5, 2.0, 3.0, 4.0, 6.0, 8.0, 10.0]
        .iter()
        .map(|m| m * decade)
        .find(|r| *r >= v * (1.0 - 1e-12))
        .unwrap_or(10.0 * decade)
}

/// Sizes `spec`. See the module documentation for the relations.
pub fn size(spec: &SizingSpec) -> Result<Sized, SizingError> {
    positive("vin_min", spec.vin_min)?;
    positive("vin_max", spec.vin_max)?;
    positive("vout", spec.vout)?;
    positive("iout", spec.iout)?;
    positive("frequency", spec.frequency)?;
    positive("ripple", spec.ripple)?;
    if spec.vin_max < spec.vin_min {
        return Err(SizingError::OutOfRange {
            field: "vin_max",
            value: spec.vin_max,
            allowed: "must be at least vin_min",
        });
    }
    if spec.vout <= assumed::REFERENCE {
        return Err(SizingError::OutOfRange {
            field: "vout",
            value: spec.vout,
            allowed: "must exceed the 2.5 V reference of the feedback divider",
        });
    }
    let fs = spec.frequency;
    let mut notes = Vec::new();
    let mut note = |field: &str, text: String| notes.push((field.to_string(), text));

    // Turns: V = n·D·Vg (§6.3.2) with the diode drop, at low line and LOW_LINE_DUTY.
    let n_needed = (spec.vout + assumed::DIODE_VF) / (LOW_LINE_DUTY * spec.vin_min);
    // Volt-seconds at the duty limit and high line set Np: ΔB = Vg·D/(fs·Np·Ae).
    let b_peak = FLUX_FRACTION * assumed::BSAT;
    let np = (spec.vin_max * MAX_DUTY / (fs * b_peak * assumed::CORE_AREA))
        .ceil()
        .max(2.0);
    // Round Ns up so low-line duty stays at or below LOW_LINE_DUTY.
    let ns = (n_needed * np).ceil().max(1.0);
    let n = ns / np;
    note(
        "converter.transformer.primary_turns",
        format!(
            "Np = ceil(Vin,max·Dmax/(fs·Bpk·Ae)) = {np}: the volt-seconds of the largest pulse (duty limit {MAX_DUTY} at high line) keep the flux density at or below {FLUX_FRACTION} of Bsat {} T on an assumed core area Ae {} mm² (E&M §6.3.2, core reset).",
            assumed::BSAT,
            assumed::CORE_AREA * 1e6
        ),
    );
    note(
        "converter.transformer.secondary_turns",
        format!(
            "Ns = ceil(Np·(Vout + VF)/(D·Vin,min)) = {ns}: V = (Ns/Np)·D·Vg (E&M §6.3.2) with a {} V rectifier drop, so full load at low line needs duty {LOW_LINE_DUTY} or less, below the controller's limit {MAX_DUTY}.",
            assumed::DIODE_VF
        ),
    );
    let reset_turns = match spec.reset {
        ResetScheme::ResetWinding => {
            note(
                "converter.reset.reset-winding.turns",
                "Nr = Np: the reset-limited duty 1/(1 + Nr/Np) is 50 % (E&M §6.3.2), above the controller's 45 % limit; the switch sees 2·Vin at reset.".into(),
            );
            Some(np)
        }
        ResetScheme::TwoSwitch => None,
    };

    // Magnetising current: a small fraction of the reflected load current.
    let lm = spec.vin_min * LOW_LINE_DUTY / (fs * MAG_FRACTION * n * spec.iout);
    note(
        "converter.transformer.magnetising_inductance",
        format!(
            "Lm = Vin,min·D/(fs·{MAG_FRACTION}·n·Iout): the magnetising current peak is a tenth of the reflected load current, so the reset handles little energy (E&M §6.3.2)."
        ),
    );

    // Output filter (§2.2, §2.5): the buck-derived inductor sees (n·Vg − V) for D·Ts.
    let d_high = (spec.vout + assumed::DIODE_VF) / (n * spec.vin_max);
    let l = (spec.vout + assumed::DIODE_VF) * (1.0 - d_high)
        / (fs * INDUCTOR_RIPPLE_FRACTION * spec.iout);
    let ripple_i = (spec.vout + assumed::DIODE_VF) * (1.0 - d_high) / (fs * l);
    note(
        "converter.output_inductor.inductance",
        format!(
            "L = (Vout + VF)(1 − D)/(fs·ΔI) at high line (D = {d_high:.3}) for an inductor ripple ΔI of {:.0} % of the load current (E&M §2.2, small-ripple approximation).",
            INDUCTOR_RIPPLE_FRACTION * 100.0
        ),
    );
    // Half the ripple budget to the ESR, half to the capacitance: ΔV = ΔI/(8·fs·C).
    let esr = 0.5 * spec.ripple / ripple_i;
    let c = ripple_i / (8.0 * fs * 0.5 * spec.ripple);
    note(
        "converter.output_capacitor.capacitance",
        "C = ΔI/(8·fs·ΔVc) with half the ripple budget ΔVc for the capacitance (E&M §2.5, two-pole filter ripple).".into(),
    );
    note(
        "converter.output_capacitor.esr",
        "ESR = (ΔV/2)/ΔI: the other half of the ripple budget; the sum is an upper bound since the two ripples peak at different times.".into(),
    );
    let current_limit = 1.5 * spec.iout + ripple_i / 2.0;
    let saturation_current = 1.25 * current_limit;
    note(
        "converter.output_inductor.saturation_current",
        "1.25 × the current limit, so the inductor does not saturate before the limit acts (common practice).".into(),
    );
    note(
        "drive.controller.current_limit.threshold",
        "Inductor current limit 1.5·Iout + ΔI/2: room for the start-up charging current (common practice).".into(),
    );

    // Stresses and ratings.
    let drain = match spec.reset {
        ResetScheme::ResetWinding => 2.0 * spec.vin_max,
        ResetScheme::TwoSwitch => spec.vin_max,
    };
    let switch_rating = rating_above(1.5 * drain);
    let diode_rating = rating_above(1.5 * n * spec.vin_max);
    note(
        "converter.switch.voltage_rating",
        format!(
            "Drain stress {drain} V ({}), rated with 1.5× margin (common practice).",
            match spec.reset {
                ResetScheme::ResetWinding => "Vin + Vin·Np/Nr at reset, E&M §6.3.2",
                ResetScheme::TwoSwitch => "each switch clamped to the input",
            }
        ),
    );
    note(
        "converter.rectifier.reverse_rating",
        "Output diodes see n·Vin,max; rated with 1.5× margin (common practice).".into(),
    );

    // Voltage-mode loop (§9.5.4): zeros at the LC resonance, poles at the ESR zero
    // and half the switching frequency, crossover a tenth of the switching frequency.
    let resonance = 1.0 / (2.0 * std::f64::consts::PI * (l * c).sqrt());
    let esr_zero = 1.0 / (2.0 * std::f64::consts::PI * esr * c);
    let half = fs / 2.0;
    let crossover = fs / 10.0;
    let zeros = [0.8 * resonance, 1.2 * resonance];
    let poles = [esr_zero.min(0.8 * half), half];
    let vin_nominal = 0.5 * (spec.vin_min + spec.vin_max);
    let h = assumed::REFERENCE / spec.vout;
    let vm = assumed::RAMP.1 - assumed::RAMP.0;
    // Between the zeros and the poles, the loop is H·(n·Vg/VM)·(f0/f)²·(fI·f/(fz1·fz2));
    // unity at the crossover fixes the integrator frequency fI.
    let plant = h * n * vin_nominal / vm;
    let integrator = zeros[0] * zeros[1] * crossover / (resonance * resonance * plant);
    note(
        "drive.controller.voltage_loop.compensation.poles_zeros",
        format!(
            "PID-like (type III) voltage-mode compensator (E&M §9.5.4): two zeros at 0.8 and 1.2 × the LC resonance f0 = 1/(2π√(LC)) cancel its double pole; poles at the ESR zero 1/(2π·ESR·C) (at most 0.4·fs) and fs/2 roll off switching ripple; the integrator frequency puts the crossover at fs/10 with the plant gain H·n·Vg/VM = {plant:.3} (divider H, ramp VM = {vm} V, E&M §7.3 and §8.2)."
        ),
    );
    let divider_top = assumed::DIVIDER_BOTTOM * (spec.vout / assumed::REFERENCE - 1.0);
    note(
        "drive.controller.voltage_loop.divider_top",
        format!(
            "Rtop = Rbottom·(Vout/Vref − 1): the divider brings {} V down to the {} V reference.",
            spec.vout,
            assumed::REFERENCE
        ),
    );
    note(
        "converter.input.voltage",
        "The middle of the input range; run a study over vin_min..vin_max to cover the line."
            .into(),
    );
    Ok(Sized {
        primary_turns: np,
        secondary_turns: ns,
        reset_turns,
        magnetising_inductance: lm,
        inductance: l,
        saturation_current,
        capacitance: c,
        esr,
        vin_nominal,
        load_resistance: spec.vout / spec.iout,
        switch_rating,
        diode_rating,
        divider_top,
        current_limit,
        integrator,
        zeros,
        poles,
        crossover,
        resonance,
        inductor_ripple: ripple_i,
        notes,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spec() -> SizingSpec {
        SizingSpec {
            vin_min: 36.0,
            vin_max: 72.0,
            vout: 5.0,
            iout: 4.0,
            frequency: 150e3,
            reset: ResetScheme::ResetWinding,
            ripple: 0.05,
        }
    }

    #[test]
    fn conversion_ratio_meets_the_output_at_low_line_within_the_duty_budget() {
        // E&M §6.3.2: V = (Ns/Np)·D·Vg; with the diode drop the duty needed at low line
        // must not exceed the 40 % the sizing aims at (rounding Ns up only lowers it).
        let s = size(&spec()).expect("sizes");
        let d = (5.0 + assumed::DIODE_VF) / (s.secondary_turns / s.primary_turns * 36.0);
        assert!(d <= LOW_LINE_DUTY + 1e-12 && d > 0.3, "duty {d}");
    }

    #[test]
    fn flux_at_the_duty_limit_and_high_line_stays_at_half_bsat() {
        // ΔB = Vg·D·Ts/(Np·Ae) (Faraday's law, E&M §6.3.2 core reset).
        let s = size(&spec()).expect("sizes");
        let b = 72.0 * MAX_DUTY / (150e3 * s.primary_turns * assumed::CORE_AREA);
        assert!(
            b <= 0.5 * assumed::BSAT + 1e-12 && b > 0.4 * assumed::BSAT,
            "B {b}"
        );
    }

    #[test]
    fn ripple_budget_splits_between_esr_and_capacitance() {
        // E&M §2.5: ΔVc = ΔI/(8·fs·C); ESR ripple ΔI·ESR; each half of 50 mV.
        let s = size(&spec()).expect("sizes");
        let dvc = s.inductor_ripple / (8.0 * 150e3 * s.capacitance);
        assert!((dvc - 0.025).abs() < 1e-9, "{dvc}");
        assert!((s.inductor_ripple * s.esr - 0.025).abs() < 1e-9);
        assert!((s.inductor_ripple / 4.0 - 0.3).abs() < 1e-9, "30 % ripple");
    }

    #[test]
    fn loop_crosses_over_at_a_tenth_of_the_switching_frequency() {
        // E&M §9.5.4: above f0 the plant falls as (f0/f)² and the compensator rises as
        // fI·f/(fz1·fz2); their product with H·n·Vg/VM is one at fc.
        let s = size(&spec()).expect("sizes");
        let n = s.secondary_turns / s.primary_turns;
        let plant = 0.5 * n * 54.0 / 2.0;
        let fc = s.crossover;
        let t = plant * (s.resonance / fc).powi(2) * s.integrator * fc / (s.zeros[0] * s.zeros[1]);
        assert!((t - 1.0).abs() < 1e-9, "{t}");
        assert!((fc - 15e3).abs() < 1e-9);
    }

    #[test]
    fn ratings_round_up_to_a_nice_value() {
        assert_eq!(rating_above(216.0), 300.0);
        assert_eq!(rating_above(100.0), 100.0);
        assert_eq!(rating_above(31.0), 40.0);
    }

    #[test]
    fn a_range_upside_down_is_refused() {
        let mut s = spec();
        s.vin_max = 20.0;
        assert!(matches!(
            size(&s),
            Err(SizingError::OutOfRange {
                field: "vin_max",
                ..
            })
        ));
    }
}
