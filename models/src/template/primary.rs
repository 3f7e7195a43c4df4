//! The primary side of each template: transformer core, primary switch(es) and the
//! reset arrangement.

use stepflux_engine::{ElementId, NodeId, Quantity, Signal, SwitchParams, Winding};

use super::{ForwardDesign, Net, Probe, ResetScheme, SaturationBranch};
use crate::error::ModelError;

/// What the primary side hands back to the template.
pub struct PrimaryStage {
    /// Dotted end of the secondary winding.
    pub secondary_dot: NodeId,
    /// Switches driven by the main gate.
    pub main_switches: Vec<ElementId>,
    /// Complementary switch.
    pub aux_switch: Option<ElementId>,
    /// Magnetising inductor.
    pub magnetising: ElementId,
    /// Diodes that carry the reset current.
    pub reset_diodes: Vec<ElementId>,
    /// Saturation branch.
    pub saturation: Option<SaturationBranch>,
    /// Probes particular to this side.
    pub probes: Vec<Probe>,
}

/// On and off resistance of the switches that model the saturation knee, ohms.
const KNEE_SWITCH: SwitchParams = SwitchParams {
    r_on: 1e-6,
    r_off: 1e9,
};

/// Builds the primary of `d` fed from node `vin`.
pub fn build(net: &mut Net, d: &ForwardDesign, vin: NodeId) -> Result<PrimaryStage, ModelError> {
    let drain = net.node("drain");
    let main = net.switch("sw", drain, NodeId::GROUND, &d.switch)?;
    // Where the primary winding's top connects: the input, or the high-side switch.
    let (top, mut main_switches) = match &d.reset {
        ResetScheme::TwoSwitch { high_side, .. } => {
            let hs = net.node("hs");
            let hi = net.switch("sw.hi", vin, hs, high_side)?;
            (hs, vec![main, hi])
        }
        _ => (vin, vec![main]),
    };
    main_switches.sort();
    let core = core(net, d, top, drain)?;
    let mut stage = PrimaryStage {
        secondary_dot: core.secondary_dot,
        main_switches,
        aux_switch: None,
        magnetising: core.magnetising,
        reset_diodes: Vec::new(),
        saturation: core.saturation,
        probes: vec![
            probe("drain.v", Signal::of(Quantity::NodeVoltage(drain)), "V"),
            probe("sw.i", Signal::of(Quantity::Current(main)), "A"),
            probe("mag.i", core.magnetising_current, "A"),
            probe("core.b", core.flux_density, "T"),
        ],
    };
    match &d.reset {
        ResetScheme::ResetWinding { diode } => {
            let (winding_end, t) = (core.reset_end.unwrap_or(NodeId::GROUND), &d.transformer);
            let anode = net.node("rst");
            net.series_rl(
                "rst",
                winding_end,
                anode,
                t.reset_resistance,
                t.reset_leakage,
            )?;
            let rd = net.diode("rst.d", anode, vin, diode)?;
            stage.reset_diodes.push(rd);
            stage
                .probes
                .push(probe("reset.i", Signal::of(Quantity::Current(rd)), "A"));
            stage
                .probes
                .push(probe("reset.v", Signal::of(Quantity::Voltage(rd)), "V"));
        }
        ResetScheme::RcdClamp {
            diode,
            resistance,
            capacitor,
            initial_voltage,
        } => {
            let clamp = net.node("clamp");
            let cd = net.diode("clamp.d", drain, clamp, diode)?;
            net.circuit().resistor("clamp.r", clamp, vin, *resistance)?;
            net.capacitor("clamp.c", clamp, vin, capacitor, *initial_voltage)?;
            stage.reset_diodes.push(cd);
            stage
                .probes
                .push(probe("reset.i", Signal::of(Quantity::Current(cd)), "A"));
            stage
                .probes
                .push(probe("reset.v", Signal::of(Quantity::Voltage(cd)), "V"));
            stage
                .probes
                .push(probe("clamp.v", between(clamp, vin), "V"));
        }
        ResetScheme::TwoSwitch { clamp_diode, .. } => {
            let lo = net.diode("clamp.lo", NodeId::GROUND, top, clamp_diode)?;
            let hi = net.diode("clamp.hi", drain, vin, clamp_diode)?;
            stage.reset_diodes.extend([lo, hi]);
            stage
                .probes
                .push(probe("reset.i", Signal::of(Quantity::Current(hi)), "A"));
            stage
                .probes
                .push(probe("reset.v", Signal::of(Quantity::Voltage(hi)), "V"));
            stage.probes.push(probe("sw.hi.v", between(vin, top), "V"));
        }
        ResetScheme::ActiveClamp {
            aux_switch,
            capacitor,
            initial_voltage,
        } => {
            let clamp = net.node("clamp");
            // Drain of the auxiliary switch at the clamp, its source at the main drain,
            // so its body diode conducts when the main drain rises above the clamp.
            let aux = net.switch("aux", clamp, drain, aux_switch)?;
            net.capacitor("clamp.c", clamp, vin, capacitor, *initial_voltage)?;
            stage.aux_switch = Some(aux);
            stage
                .probes
                .push(probe("clamp.v", between(clamp, vin), "V"));
            stage
                .probes
                .push(probe("aux.i", Signal::of(Quantity::Current(aux)), "A"));
        }
    }
    Ok(stage)
}

fn probe(name: &str, signal: Signal, unit: &'static str) -> Probe {
    Probe {
        name: name.to_string(),
        signal,
        unit,
    }
}

fn between(a: NodeId, b: NodeId) -> Signal {
    Signal::of(Quantity::NodeVoltage(a)).plus(-1.0, Quantity::NodeVoltage(b))
}

/// The transformer and its magnetising branch.
struct Core {
    secondary_dot: NodeId,
    reset_end: Option<NodeId>,
    magnetising: ElementId,
    saturation: Option<SaturationBranch>,
    magnetising_current: Signal,
    flux_density: Signal,
}

/// Primary from `top` (through its resistance and leakage) to `drain`, magnetising
/// inductance across the ideal primary, secondary to ground, and a reset winding when
/// the scheme has one (dot at ground, so it conducts into the input while the primary
/// voltage is reversed).
fn core(net: &mut Net, d: &ForwardDesign, top: NodeId, drain: NodeId) -> Result<Core, ModelError> {
    let t = &d.transformer;
    let p_dot = net.node("pri");
    net.series_rl("pri", top, p_dot, t.primary_resistance, t.primary_leakage)?;
    let lm = net
        .circuit()
        .inductor("lm", p_dot, drain, t.magnetising_inductance, 0.0)?;
    let s_dot = net.node("sec.w");
    let mut windings = vec![
        Winding {
            dot: p_dot,
            other: drain,
            turns: t.primary_turns,
        },
        Winding {
            dot: s_dot,
            other: NodeId::GROUND,
            turns: t.secondary_turns,
        },
    ];
    let reset_end = match d.reset {
        ResetScheme::ResetWinding { .. } => {
            let end = net.node("rst.w");
            windings.push(Winding {
                dot: NodeId::GROUND,
                other: end,
                turns: t.reset_turns,
            });
            Some(end)
        }
        _ => None,
    };
    net.circuit().transformer("xfmr", windings)?;
    let mut magnetising_current = Signal::of(Quantity::Current(lm));
    let saturation = match t.saturated_inductance {
        Some(ls) => {
            // Parallel branch that turns L1 into L2 above the knee: L1‖La = L2.
            let la = t.magnetising_inductance * ls / (t.magnetising_inductance - ls);
            let mut branch = |name: &str| -> Result<ElementId, ModelError> {
                let mid = net.node(&format!("{name}.mid"));
                let sw = net.circuit().switch(name, p_dot, mid, KNEE_SWITCH, false)?;
                let l = net
                    .circuit()
                    .inductor(&format!("{name}.l"), mid, drain, la, 0.0)?;
                magnetising_current.terms.push((1.0, Quantity::Current(l)));
                Ok(sw)
            };
            let positive = branch("sat.pos")?;
            let negative = branch("sat.neg")?;
            Some(SaturationBranch {
                magnetising: lm,
                positive,
                negative,
                knee: t.knee_current(),
            })
        }
        None => None,
    };
    let flux_density = Signal {
        terms: vec![(t.tesla_per_amp(), Quantity::Current(lm))],
    };
    Ok(Core {
        secondary_dot: s_dot,
        reset_end,
        magnetising: lm,
        saturation,
        magnetising_current,
        flux_density,
    })
}
