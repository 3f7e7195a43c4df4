//! The averaged, linearised converter as an engine circuit, and its matrices.
//!
//! The switch network is replaced by its averaged-switch model (Erickson & Maksimović,
//! *Fundamentals of Power Electronics*, 2nd ed., §7.4), linearised about the operating
//! point (d = D + d̂; products of two perturbations dropped, §7.2):
//! - secondary port: a voltage D·n·v_in + K·(d − D) + const behind the averaged switch
//!   resistance, K = ∂⟨v_rect⟩/∂d = n·V_in − Vr + Vf − (Ron − Rf)·I_L;
//! - primary port: a current D·n·i_L + n·I_L·(d − D) drawn from the converter input.
//!
//! The duty is an independent source, so the loop is open at the modulator input (an
//! ideal high-impedance point: the comparator loads nothing). Output filter, load,
//! divider, reference, and the error amplifier and its compensation are the very
//! elements the switching model uses ([`crate::controller::Amplifier::build`],
//! [`crate::controller::Compensation::build`]), so both models share one description.
//! Nodal analysis of the all-off topology (the amplifier's clamp diodes blocking) then
//! gives the affine model ẋ = A x + B u + e, y = C x + D u + f.

use nalgebra::{DMatrix, DVector};
use stepflux_engine::{
    Circuit, ElementId, ElementKind, NodeId, Observation, Quantity, Signal, StateKind, System,
    TimeGrid, Topology, Waveform,
};

use super::operating::{OperatingPoint, StageParameters};
use crate::controller::{error_amplifier, ControllerSpec};
use crate::error::ModelError;
use crate::template::{ForwardDesign, Net};

/// The averaged circuit with the elements that are inputs and the nodes read out.
pub(crate) struct AveragedCircuit {
    pub circuit: Circuit,
    /// Independent inputs, in [`super::Input`] order, then the duty.
    pub inputs: Vec<ElementId>,
    /// Output signals, in [`super::Output`] order (duty excluded: it is the input).
    pub outputs: Vec<Signal>,
}

/// Builds the open-loop averaged circuit linearised about `op`.
pub(crate) fn build(
    design: &ForwardDesign,
    spec: &ControllerSpec,
    p: &StageParameters,
    op: &OperatingPoint,
) -> Result<AveragedCircuit, ModelError> {
    let mut net = Net::new();
    let mut input = design.input.clone();
    if p.upstream_resistance == 0.0 {
        // Already switched with the primary current (in `on_resistance`).
        input.resistance = 0.0;
    }
    let stage = net.input_stage(&input)?;
    let duty_node = net.node("avg.d");
    let duty = net.circuit().voltage_source(
        "avg.duty",
        duty_node,
        NodeId::GROUND,
        Waveform::Constant(op.duty),
    )?;
    let (n, d0, il) = (p.turns_ratio, op.duty, op.inductor_current);
    let (vr, vf) = (p.rectifier_drop, p.freewheel_drop);
    let k = n * op.converter_input - vr + vf - (p.on_resistance - p.freewheel_resistance) * il;
    let emf = net.node("avg.emf");
    let rect = net.node("rect");
    let out = net.node("out");
    let c = net.circuit();
    let lout_end = if p.inductor_resistance > 0.0 {
        c.node("lout.dcr")
    } else {
        out
    };
    let lout = c.inductor("lout", rect, lout_end, p.inductance, il)?;
    if p.inductor_resistance > 0.0 {
        c.resistor("lout.dcr", lout_end, out, p.inductor_resistance)?;
    }
    let source = Signal {
        terms: vec![
            (d0 * n, Quantity::NodeVoltage(stage.node)),
            (k, Quantity::NodeVoltage(duty_node)),
            (-k * d0 - d0 * vr - (1.0 - d0) * vf, Quantity::One),
        ],
    };
    c.controlled_voltage_source("avg.v", emf, NodeId::GROUND, source)?;
    c.resistor("avg.r", emf, rect, p.switch_resistance(d0))?;
    let drawn = Signal {
        terms: vec![
            (d0 * n, Quantity::Current(lout)),
            (n * il, Quantity::NodeVoltage(duty_node)),
            (-n * il * d0, Quantity::One),
        ],
    };
    c.controlled_current_source("avg.i", stage.node, NodeId::GROUND, drawn)?;
    net.capacitor(
        "cout",
        out,
        NodeId::GROUND,
        &design.output_capacitor,
        op.output_voltage,
    )?;
    if let Some(r) = design.load.resistance {
        net.circuit().resistor("load.r", out, NodeId::GROUND, r)?;
    }
    let load = net.circuit().current_source(
        "load.i",
        out,
        NodeId::GROUND,
        Waveform::Constant(op.sink_current),
    )?;
    let (reference, vc) = voltage_loop(&mut net, spec, out, op)?;
    Ok(AveragedCircuit {
        circuit: net.into_circuit(),
        inputs: vec![load, stage.source, reference, duty],
        outputs: vec![
            Signal::of(Quantity::NodeVoltage(out)),
            Signal::of(Quantity::Current(lout)),
            Signal::of(Quantity::NodeVoltage(vc)),
        ],
    })
}

/// The controller's own voltage loop (divider, reference and error amplifier), the
/// reference held constant and the amplifier starting at the operating point; returns
/// the reference source and the amplifier output node.
fn voltage_loop(
    net: &mut Net,
    spec: &ControllerSpec,
    out: NodeId,
    op: &OperatingPoint,
) -> Result<(ElementId, NodeId), ModelError> {
    let v = &spec.voltage_loop;
    let (fb, reference, ref_node) = v.build_sense(net, out, Waveform::Constant(v.reference))?;
    let ea = error_amplifier(
        net,
        "ctl.ea",
        fb,
        ref_node,
        &v.amplifier,
        &v.compensation,
        op.control_voltage,
    )?;
    Ok((reference, ea))
}

/// ẋ = A x + B u + e, y = C x + D u + f.
pub(crate) struct Affine {
    pub a: DMatrix<f64>,
    pub b: DMatrix<f64>,
    pub e: DVector<f64>,
    pub c: DMatrix<f64>,
    pub d: DMatrix<f64>,
    pub f: DVector<f64>,
    /// Element name of each state.
    pub states: Vec<String>,
}

/// Nodal analysis of the all-off topology: sources listed in `inputs` become columns of
/// B and D, every other (constant) source and the unit offset fold into e and f.
pub(crate) fn affine(
    circuit: &Circuit,
    inputs: &[ElementId],
    outputs: &[Signal],
) -> Result<Affine, ModelError> {
    let grid = TimeGrid::new(1.0, 1.0)?;
    let system = System::new(circuit.clone(), Observation::default(), grid, 2)?;
    let nodal = system.nodal(Topology::default())?;
    let l = system.layout();
    let nx = l.nx();
    let m = nodal.state_matrix()?;
    let mut rows = DMatrix::<f64>::zeros(outputs.len(), l.nz());
    for (r, s) in outputs.iter().enumerate() {
        rows.set_row(r, &nodal.signal(s)?);
    }
    let mut model = Affine {
        a: m.view((0, 0), (nx, nx)).into_owned(),
        b: DMatrix::zeros(nx, inputs.len()),
        e: m.column(l.one()).rows(0, nx).into_owned(),
        c: rows.columns(0, nx).into_owned(),
        d: DMatrix::zeros(outputs.len(), inputs.len()),
        f: rows.column(l.one()).into_owned(),
        states: l
            .states
            .iter()
            .map(|s| match *s {
                StateKind::InductorCurrent(e) | StateKind::CapacitorVoltage(e) => {
                    circuit.element(e).name.clone()
                }
                StateKind::Block(b, k) => format!("{b:?}[{k}]"),
            })
            .collect(),
    };
    for (k, &src) in l.sources.iter().enumerate() {
        let col = l.w(k);
        if let Some(j) = inputs.iter().position(|&i| i == src) {
            model.b.set_column(j, &m.column(col).rows(0, nx));
            model.d.set_column(j, &rows.column(col));
        } else {
            let value = constant_value(circuit, src)?;
            model.e += m.column(col).rows(0, nx) * value;
            model.f += rows.column(col) * value;
        }
    }
    Ok(model)
}

fn constant_value(circuit: &Circuit, id: ElementId) -> Result<f64, ModelError> {
    let el = circuit.element(id);
    match &el.kind {
        ElementKind::VoltageSource {
            waveform: Waveform::Constant(v),
        }
        | ElementKind::CurrentSource {
            waveform: Waveform::Constant(v),
        } => Ok(*v),
        _ => Err(ModelError::Infeasible(format!(
            "averaged model: source '{}' is not constant",
            el.name
        ))),
    }
}
