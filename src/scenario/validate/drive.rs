//! Second stage of loading, the drive part: a fixed duty, or the PWM controller with its
//! amplifier and compensation, checked field by field.

use stepflux_models::controller::{
    Amplifier, Compensation, ControllerSpec, CurrentLimit, IsolatedFeedback, Lockout, Oscillator,
    OutputMode, VoltageLoop,
};
use stepflux_models::gate::OpenLoopGate;

use super::{or_zero, Ctx};
use crate::job::Drive;
use crate::scenario::error::ScenarioError;
use crate::scenario::raw;

/// The drive, checked.
pub fn drive(ctx: &Ctx, d: &raw::Drive) -> Result<Drive, ScenarioError> {
    match d {
        raw::Drive::OpenLoop(o) => {
            let gate = OpenLoopGate {
                frequency: o.frequency.si(),
                duty: o.duty.si(),
                dead_time: or_zero(o.dead_time, |v| v.si()),
            };
            gate.validate().map_err(|e| {
                ctx.model("drive.open_loop", e, &|f| {
                    format!("drive.open_loop.{}", f.trim_start_matches("gate."))
                })
            })?;
            Ok(Drive::OpenLoop(gate))
        }
        raw::Drive::Controller(c) => controller(ctx, c).map(Drive::Controller),
    }
}

fn controller(ctx: &Ctx, c: &raw::Controller) -> Result<ControllerSpec, ScenarioError> {
    let base = "drive.controller";
    let v = &c.voltage_loop;
    let spec = ControllerSpec {
        oscillator: Oscillator {
            frequency: c.oscillator.frequency.si(),
            valley: c.oscillator.valley.si(),
            peak: c.oscillator.peak.si(),
        },
        mode: match c.mode {
            None | Some(raw::Mode::SingleEnded) => OutputMode::SingleEnded,
            Some(raw::Mode::Alternating) => OutputMode::Alternating,
        },
        max_duty: c.max_duty.si(),
        soft_start: or_zero(c.soft_start, |v| v.si()),
        voltage_loop: VoltageLoop {
            reference: v.reference.si(),
            reference_soft_start: or_zero(v.reference_soft_start, |v| v.si()),
            divider_top: v.divider_top.si(),
            divider_bottom: v.divider_bottom.si(),
            amplifier: amplifier(&v.amplifier),
            compensation: compensation(
                ctx,
                &format!("{base}.voltage_loop.compensation"),
                &v.compensation,
            )?,
        },
        current_limit: match &c.current_limit {
            Some(l) => Some(CurrentLimit {
                sense_gain: l.sense_gain.si(),
                threshold: l.threshold.si(),
                amplifier: amplifier(&l.amplifier),
                compensation: compensation(
                    ctx,
                    &format!("{base}.current_limit.compensation"),
                    &l.compensation,
                )?,
            }),
            None => None,
        },
        blanking: or_zero(c.blanking, |v| v.si()),
        min_on_time: or_zero(c.min_on_time, |v| v.si()),
        gate_delay: or_zero(c.gate_delay, |v| v.si()),
        lockout: c.lockout.as_ref().map(|l| Lockout {
            start: l.start.si(),
            stop: l.stop.si(),
        }),
        aux_dead_time: or_zero(c.aux_dead_time, |v| v.si()),
        isolated: c.isolated.as_ref().map(|i| IsolatedFeedback {
            led_resistor: i.led_resistor.si(),
            led_vf: i.led_vf.si(),
            ctr: i.ctr.si(),
            emitter_resistor: i.emitter_resistor.si(),
            pole_hz: i.pole.si(),
        }),
    };
    spec.validate()
        .map_err(|e| ctx.model(base, e, &|f| format!("drive.{f}")))?;
    Ok(spec)
}

fn amplifier(a: &raw::Amplifier) -> Amplifier {
    Amplifier {
        dc_gain: a.dc_gain.si(),
        gain_bandwidth: a.gain_bandwidth.si(),
        output_low: a.output_low.si(),
        output_high: a.output_high.si(),
    }
}

/// A compensation network with every value checked; poles and zeros are synthesised
/// here so a shape the models cannot realise is reported at its path.
fn compensation(
    ctx: &Ctx,
    path: &str,
    c: &raw::Compensation,
) -> Result<Compensation, ScenarioError> {
    let pos = |field: &str, v: f64| ctx.positive(&format!("{path}.{field}"), v);
    let network = match c {
        raw::Compensation::Type1(n) => Compensation::TypeI {
            r1: pos("type1.r1", n.r1.si())?,
            c1: pos("type1.c1", n.c1.si())?,
        },
        raw::Compensation::Type2(n) => Compensation::TypeII {
            r1: pos("type2.r1", n.r1.si())?,
            r2: pos("type2.r2", n.r2.si())?,
            c1: pos("type2.c1", n.c1.si())?,
            c2: pos("type2.c2", n.c2.si())?,
        },
        raw::Compensation::Type3(n) => Compensation::TypeIII {
            r1: pos("type3.r1", n.r1.si())?,
            r2: pos("type3.r2", n.r2.si())?,
            r3: pos("type3.r3", n.r3.si())?,
            c1: pos("type3.c1", n.c1.si())?,
            c2: pos("type3.c2", n.c2.si())?,
            c3: pos("type3.c3", n.c3.si())?,
        },
        raw::Compensation::PolesZeros(n) => {
            let hz =
                |list: &[crate::units::Hertz], name: &str| -> Result<Vec<f64>, ScenarioError> {
                    list.iter()
                        .enumerate()
                        .map(|(k, f)| pos(&format!("poles_zeros.{name}[{k}]"), f.si()))
                        .collect()
                };
            Compensation::PolesZeros {
                r1: pos("poles_zeros.r1", n.r1.si())?,
                integrator_hz: pos("poles_zeros.integrator", n.integrator.si())?,
                zeros_hz: hz(&n.zeros, "zeros")?,
                poles_hz: hz(&n.poles, "poles")?,
            }
        }
    };
    network.components().map_err(|e| {
        ctx.model(&format!("{path}.poles_zeros"), e, &|f| {
            format!(
                "{path}.poles_zeros.{}",
                f.trim_start_matches("compensation.")
            )
        })
    })?;
    Ok(network)
}
