//! The averaged power stage in secondary terms and its DC operating point under the
//! voltage loop.
//!
//! In CCM the forward converter's output stage is a buck fed from n·Vin, n = Ns/Np
//! (Erickson & Maksimović, *Fundamentals of Power Electronics*, 2nd ed., §6.3.2). The
//! rectifier node averages to
//! ⟨v_rect⟩ = d·(n·v_in − Vr − Ron·i_L) − (1 − d)·(Vf + Rf·i_L) − Rℓ·i_L,
//! with the conduction drops as constant thresholds plus averaged resistances
//! (ibid., ch. 3, inclusion of semiconductor conduction losses). The magnetising
//! current is neglected in the primary drops; the leakage inductance Lℓ (referred to the
//! secondary) costs Lℓ·i_L volt-seconds per period as the rectifier current commutes,
//! i.e. an equivalent resistance Rℓ = fsw·Lℓ (common practice).

use crate::components::positive;
use crate::controller::{ControllerSpec, OutputMode};
use crate::error::ModelError;
use crate::template::{ForwardDesign, ResetScheme};

/// The output stage's averaged parameters in secondary terms.
#[derive(Clone, Debug, PartialEq)]
pub struct StageParameters {
    /// Turns ratio n = Ns/Np.
    pub turns_ratio: f64,
    /// Rectifier threshold Vr, volts.
    pub rectifier_drop: f64,
    /// Freewheel threshold Vf, volts.
    pub freewheel_drop: f64,
    /// Resistance in the on-state path, secondary terms: rectifier rd, secondary
    /// winding, and n²·(primary winding + switch(es) [+ source, when no capacitor
    /// decouples it]), ohms.
    pub on_resistance: f64,
    /// Freewheel rd, ohms.
    pub freewheel_resistance: f64,
    /// Leakage duty-loss resistance fsw·Lℓ, ohms.
    pub leakage_resistance: f64,
    /// Resistance between the source and the converter-side input capacitor, ohms
    /// (0 when there is no input capacitor: then it is in `on_resistance`).
    pub upstream_resistance: f64,
    /// Output inductor winding resistance, ohms.
    pub inductor_resistance: f64,
    /// Output inductance, henries.
    pub inductance: f64,
    /// Conductance loading the output at DC (load resistor and feedback divider),
    /// siemens.
    pub load_conductance: f64,
    /// Converter switching period (per output), seconds.
    pub period: f64,
    /// Converter duty per unit of ramp duty: 1 single-ended, ½ alternating.
    pub duty_per_ramp: f64,
}

impl StageParameters {
    /// Reads the averaged parameters off a design and its controller.
    pub fn new(design: &ForwardDesign, spec: &ControllerSpec) -> Result<Self, ModelError> {
        design.validate()?;
        spec.validate()?;
        let t = &design.transformer;
        let n = t.secondary_turns / t.primary_turns;
        let mut primary = design.switch.r_on + t.primary_resistance;
        if let ResetScheme::TwoSwitch { high_side, .. } = &design.reset {
            primary += high_side.r_on;
        }
        let input = &design.input;
        let filter_r = input.filter.as_ref().map_or(0.0, |f| f.resistance);
        // Without a capacitor at the converter's input its voltage is pulsed, so the
        // source resistance is switched with the primary current, not averaged before it.
        let decoupled = input.filter.is_some() || input.bulk.is_some();
        let (upstream, switched_source) = if decoupled {
            (input.resistance + filter_r, 0.0)
        } else {
            (0.0, input.resistance)
        };
        let (clock, duty_per_ramp) = match spec.mode {
            OutputMode::SingleEnded => (spec.clock_period(), 1.0),
            OutputMode::Alternating => (2.0 * spec.clock_period(), 0.5),
        };
        let leakage = t.secondary_leakage + n * n * t.primary_leakage;
        let v = &spec.voltage_loop;
        let load_conductance = design.load.resistance.map_or(0.0, |r| 1.0 / r)
            + 1.0 / (v.divider_top + v.divider_bottom);
        Ok(StageParameters {
            turns_ratio: n,
            rectifier_drop: design.rectifier.vf,
            freewheel_drop: design.freewheel.vf,
            on_resistance: design.rectifier.rd
                + t.secondary_resistance
                + n * n * (primary + switched_source),
            freewheel_resistance: design.freewheel.rd,
            leakage_resistance: leakage / clock,
            upstream_resistance: upstream,
            inductor_resistance: design.output_inductor.dcr,
            inductance: design.output_inductor.inductance,
            load_conductance,
            period: clock,
            duty_per_ramp,
        })
    }

    /// Averaged resistance between the switched source and the inductor at duty `d`
    /// (excluding the inductor's own), ohms.
    pub fn switch_resistance(&self, d: f64) -> f64 {
        d * self.on_resistance + (1.0 - d) * self.freewheel_resistance + self.leakage_resistance
    }

    /// Total series resistance at duty `d`, DC, secondary terms: switch network,
    /// inductor, and the upstream resistance seen through d·n twice, ohms.
    pub fn series_resistance(&self, d: f64) -> f64 {
        let n = self.turns_ratio;
        self.switch_resistance(d)
            + self.inductor_resistance
            + d * d * n * n * self.upstream_resistance
    }

    /// DC output voltage at duty `d`, line `vin` and sink current `i_sink`, volts:
    /// Vo = d·(n·Vin − Vr) − (1 − d)·Vf − Rs(d)·I_L with I_L = G·Vo + I_sink.
    pub fn output_at(&self, d: f64, vin: f64, i_sink: f64) -> f64 {
        let rs = self.series_resistance(d);
        let emf =
            d * (self.turns_ratio * vin - self.rectifier_drop) - (1.0 - d) * self.freewheel_drop;
        (emf - rs * i_sink) / (1.0 + rs * self.load_conductance)
    }
}

/// The DC operating point of the regulated converter.
#[derive(Clone, Debug, PartialEq)]
pub struct OperatingPoint {
    /// Converter duty D (on-time over the converter's switching period).
    pub duty: f64,
    /// Output voltage, volts.
    pub output_voltage: f64,
    /// Output inductor current, amperes.
    pub inductor_current: f64,
    /// Control voltage (error-amplifier output), volts.
    pub control_voltage: f64,
    /// Source voltage, volts.
    pub line: f64,
    /// Voltage at the converter's input (after source and filter resistance), volts.
    pub converter_input: f64,
    /// Load sink current, amperes.
    pub sink_current: f64,
    /// Peak-to-peak output inductor ripple, amperes.
    pub inductor_ripple: f64,
}

/// Solves the averaged DC equations with the loop closed: the stage gives Vo(D), the
/// amplifier (DC gain A0, capacitors open, so its inverting input sits at Vref) gives
/// Vc = A0·(k·Vo − Vref) with k = Rbot/(Rtop + Rbot), and the ramp gives
/// D = m·(peak − Vc)/(peak − valley).
pub fn operating_point(
    p: &StageParameters,
    design: &ForwardDesign,
    spec: &ControllerSpec,
) -> Result<OperatingPoint, ModelError> {
    let vin = design.input.voltage;
    let i_sink = design.load.current.unwrap_or(0.0);
    let v = &spec.voltage_loop;
    let o = &spec.oscillator;
    let k = v.divider_bottom / (v.divider_top + v.divider_bottom);
    let a0 = v.amplifier.dc_gain;
    let ramp = o.peak - o.valley;
    let control = |d: f64| o.peak - d / p.duty_per_ramp * ramp;
    let loop_output = |d: f64| (v.reference + control(d) / a0) / k;
    // Stage output rises with D and the loop's demanded output falls with it, so the
    // difference has one root; bisection cannot miss it.
    let gap = |d: f64| p.output_at(d, vin, i_sink) - loop_output(d);
    let (mut lo, mut hi) = (0.0, 1.0);
    if !(gap(lo) < 0.0 && gap(hi) > 0.0) {
        return Err(ModelError::Infeasible(format!(
            "averaged model: no duty in (0, 1) regulates the output to {:.4} V",
            v.set_point()
        )));
    }
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if gap(mid) > 0.0 {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    let d = 0.5 * (lo + hi);
    let vo = p.output_at(d, vin, i_sink);
    let il = p.load_conductance * vo + i_sink;
    let n = p.turns_ratio;
    // Freewheel interval: the inductor sees −(Vo + Vf + (Rf + DCR)·I_L) for (1 − D)·T.
    let ripple = (vo + p.freewheel_drop + (p.freewheel_resistance + p.inductor_resistance) * il)
        * (1.0 - d)
        * p.period
        / p.inductance;
    let op = OperatingPoint {
        duty: d,
        output_voltage: vo,
        inductor_current: il,
        control_voltage: control(d),
        line: vin,
        converter_input: vin - p.upstream_resistance * d * n * il,
        sink_current: i_sink,
        inductor_ripple: ripple,
    };
    check_linear(&op, spec)?;
    Ok(op)
}

/// Refuses operating points where the small-signal CCM model does not apply.
fn check_linear(op: &OperatingPoint, spec: &ControllerSpec) -> Result<(), ModelError> {
    positive("averaged.inductor_current", op.inductor_current)?;
    let amp = &spec.voltage_loop.amplifier;
    let reasons = [
        (
            op.inductor_current <= 0.5 * op.inductor_ripple,
            format!(
                "discontinuous conduction (I_L = {:.3} A, ripple {:.3} A p-p): the CCM average does not apply",
                op.inductor_current, op.inductor_ripple
            ),
        ),
        (
            op.duty >= spec.max_duty,
            format!("duty {:.4} reaches the clamp {}", op.duty, spec.max_duty),
        ),
        (
            op.control_voltage <= amp.output_low || op.control_voltage >= amp.output_high,
            format!("control voltage {:.4} V is at an amplifier limit", op.control_voltage),
        ),
        (
            spec.current_limit.as_ref().is_some_and(|c| {
                c.sense_gain * op.inductor_current >= c.threshold
            }),
            "the current limit is active".to_string(),
        ),
        (
            spec.lockout.as_ref().is_some_and(|l| op.line < l.start),
            "the input is below the lockout start".to_string(),
        ),
    ];
    match reasons.into_iter().find(|(bad, _)| *bad) {
        Some((_, why)) => Err(ModelError::Infeasible(format!("averaged model: {why}"))),
        None => Ok(()),
    }
}
