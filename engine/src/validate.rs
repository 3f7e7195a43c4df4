//! Parameter checks: every value in range and every reference resolvable, so later
//! stages can index without failing.

use crate::circuit::{Block, Circuit, ElementKind, NodeId, Quantity, Signal};
use crate::error::EngineError;

fn positive(element: &str, what: &'static str, value: f64) -> Result<(), EngineError> {
    if value.is_finite() && value > 0.0 {
        Ok(())
    } else {
        Err(EngineError::BadValue {
            element: element.to_string(),
            what,
            value,
            allowed: "a finite value > 0",
        })
    }
}

fn finite(element: &str, what: &'static str, value: f64) -> Result<(), EngineError> {
    if value.is_finite() {
        Ok(())
    } else {
        Err(EngineError::BadValue {
            element: element.to_string(),
            what,
            value,
            allowed: "a finite value",
        })
    }
}

fn on_off(element: &str, r_on: f64, r_off: f64) -> Result<(), EngineError> {
    positive(element, "on resistance (ohm)", r_on)?;
    positive(element, "off resistance (ohm)", r_off)?;
    if r_off > r_on {
        Ok(())
    } else {
        Err(EngineError::BadValue {
            element: element.to_string(),
            what: "off resistance (ohm)",
            value: r_off,
            allowed: "a value greater than the on resistance",
        })
    }
}

/// Checks every element, block and signal of the circuit.
pub fn validate(circuit: &Circuit) -> Result<(), EngineError> {
    let nodes = circuit.node_names.len();
    let node_ok = |name: &str, n: NodeId| {
        if n.0 < nodes {
            Ok(())
        } else {
            Err(EngineError::BadReference {
                element: name.to_string(),
                problem: format!("node #{} does not exist", n.0),
            })
        }
    };
    for e in &circuit.elements {
        let name = e.name.as_str();
        node_ok(name, e.a)?;
        node_ok(name, e.b)?;
        match &e.kind {
            ElementKind::Resistor { ohms } => positive(name, "resistance (ohm)", *ohms)?,
            ElementKind::Inductor {
                henries,
                initial_current,
            } => {
                positive(name, "inductance (H)", *henries)?;
                finite(name, "initial current (A)", *initial_current)?;
            }
            ElementKind::Capacitor {
                farads,
                initial_voltage,
            } => {
                positive(name, "capacitance (F)", *farads)?;
                finite(name, "initial voltage (V)", *initial_voltage)?;
            }
            ElementKind::VoltageSource { waveform } | ElementKind::CurrentSource { waveform } => {
                waveform.validate(name)?
            }
            ElementKind::BlockVoltageSource { block, output }
            | ElementKind::BlockCurrentSource { block, output } => {
                let ok = circuit
                    .blocks
                    .get(block.0)
                    .is_some_and(|b| *output < b.c.len());
                if !ok {
                    return Err(EngineError::BadReference {
                        element: name.to_string(),
                        problem: format!("block #{} output {output} does not exist", block.0),
                    });
                }
            }
            ElementKind::ControlledVoltageSource { control }
            | ElementKind::ControlledCurrentSource { control } => {
                validate_signal(circuit, name, control)?
            }
            ElementKind::Switch { params, .. } => on_off(name, params.r_on, params.r_off)?,
            ElementKind::Diode { params } => {
                on_off(name, params.r_on, params.r_off)?;
                finite(name, "forward voltage (V)", params.vf)?;
            }
            ElementKind::Transformer { windings } => {
                if windings.len() < 2 {
                    return Err(EngineError::BadValue {
                        element: name.to_string(),
                        what: "number of windings",
                        value: windings.len() as f64,
                        allowed: "two or more",
                    });
                }
                for w in windings {
                    node_ok(name, w.dot)?;
                    node_ok(name, w.other)?;
                    positive(name, "turns", w.turns)?;
                }
            }
        }
    }
    for block in &circuit.blocks {
        validate_block(circuit, block)?;
    }
    Ok(())
}

fn validate_block(circuit: &Circuit, block: &Block) -> Result<(), EngineError> {
    let (n, m, p) = (block.a.len(), block.inputs.len(), block.c.len());
    let shape = |what: &str, rows: &[Vec<f64>], r: usize, c: usize| {
        let ok = rows.len() == r
            && rows
                .iter()
                .all(|row| row.len() == c && row.iter().all(|v| v.is_finite()));
        if ok {
            Ok(())
        } else {
            Err(EngineError::BadReference {
                element: block.name.clone(),
                problem: format!("matrix {what} must be {r}×{c} of finite numbers"),
            })
        }
    };
    shape("A", &block.a, n, n)?;
    shape("B", &block.b, n, m)?;
    shape("C", &block.c, p, n)?;
    if !block.d.is_empty() {
        shape("D", &block.d, p, m)?;
    }
    if block.initial_state.len() != n || block.initial_state.iter().any(|v| !v.is_finite()) {
        return Err(EngineError::BadReference {
            element: block.name.clone(),
            problem: format!("initial state must hold {n} finite numbers"),
        });
    }
    for s in &block.inputs {
        validate_signal(circuit, &block.name, s)?;
    }
    Ok(())
}

/// Checks that every quantity a signal names exists.
pub fn validate_signal(circuit: &Circuit, owner: &str, s: &Signal) -> Result<(), EngineError> {
    let bad = |problem: String| {
        Err(EngineError::BadReference {
            element: owner.to_string(),
            problem,
        })
    };
    for &(c, q) in &s.terms {
        finite(owner, "signal coefficient", c)?;
        match q {
            Quantity::NodeVoltage(n) if n.0 >= circuit.node_names.len() => {
                return bad(format!("node #{} does not exist", n.0))
            }
            Quantity::Current(e) | Quantity::Voltage(e) | Quantity::WindingCurrent(e, _)
                if e.0 >= circuit.elements.len() =>
            {
                return bad(format!("element #{} does not exist", e.0))
            }
            Quantity::BlockOutput(b, _) | Quantity::BlockState(b, _)
                if b.0 >= circuit.blocks.len() =>
            {
                return bad(format!("block #{} does not exist", b.0))
            }
            _ => {}
        }
    }
    Ok(())
}
