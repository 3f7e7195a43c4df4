//! Signals as linear forms over the nodal unknowns and the augmented state, for sources
//! controlled by circuit quantities. A controlled source stamps its control into the
//! nodal matrix (the unknowns part) and the right-hand side (the state part), which is
//! how nodal analysis treats dependent sources (Chua & Lin, *Computer-Aided Analysis of
//! Electronic Circuits*, on modified nodal formulation of controlled sources).

use crate::circuit::{Circuit, ElementKind, Quantity, Signal};
use crate::error::EngineError;
use crate::layout::Layout;
use crate::topology::Topology;

/// Σ coef·unknown + Σ coef·z[col].
#[derive(Default)]
pub(crate) struct Form {
    pub unknowns: Vec<(usize, f64)>,
    pub z: Vec<(usize, f64)>,
}

/// How deep controls may refer to other controls before it counts as a loop.
const MAX_DEPTH: usize = 16;

pub(crate) struct Forms<'a> {
    pub circuit: &'a Circuit,
    pub layout: &'a Layout,
    pub topology: Topology,
}

impl Forms<'_> {
    pub fn signal(&self, s: &Signal, owner: usize, depth: usize) -> Result<Form, EngineError> {
        if depth > MAX_DEPTH {
            return Err(EngineError::BadReference {
                element: self.circuit.elements[owner].name.clone(),
                problem: "controls refer to each other in a loop".into(),
            });
        }
        let mut f = Form::default();
        for &(c, q) in &s.terms {
            self.quantity(&mut f, c, q, owner, depth)?;
        }
        Ok(f)
    }

    fn node(&self, f: &mut Form, c: f64, n: crate::circuit::NodeId) {
        if let Some(k) = self.layout.node_unknown(n) {
            f.unknowns.push((k, c));
        }
    }

    fn quantity(
        &self,
        f: &mut Form,
        c: f64,
        q: Quantity,
        owner: usize,
        depth: usize,
    ) -> Result<(), EngineError> {
        let l = self.layout;
        match q {
            Quantity::One => f.z.push((l.one(), c)),
            Quantity::NodeVoltage(n) => self.node(f, c, n),
            Quantity::Voltage(e) => {
                let el = &self.circuit.elements[e.0];
                self.node(f, c, el.a);
                self.node(f, -c, el.b);
            }
            Quantity::Current(e) => self.current(f, c, e.0, owner, depth)?,
            Quantity::WindingCurrent(e, k) => match l.branch_of[e.0] {
                Some(first) => f.unknowns.push((first + k, c)),
                None => {
                    return Err(self.bad(
                        owner,
                        "names a winding of an element that is not a transformer",
                    ))
                }
            },
            Quantity::BlockState(b, k) => f.z.push((l.block_offset[b.0] + k, c)),
            Quantity::BlockOutput(b, k) => {
                let block = &self.circuit.blocks[b.0];
                let off = l.block_offset[b.0];
                for (j, &v) in block
                    .c
                    .get(k)
                    .map(Vec::as_slice)
                    .unwrap_or(&[])
                    .iter()
                    .enumerate()
                {
                    f.z.push((off + j, c * v));
                }
                if let Some(d) = block.d.get(k) {
                    for (j, &dj) in d.iter().enumerate().filter(|(_, v)| **v != 0.0) {
                        let inner = self.signal(&block.inputs[j], owner, depth + 1)?;
                        f.unknowns
                            .extend(inner.unknowns.iter().map(|&(u, v)| (u, v * c * dj)));
                        f.z.extend(inner.z.iter().map(|&(u, v)| (u, v * c * dj)));
                    }
                }
            }
        }
        Ok(())
    }

    fn current(
        &self,
        f: &mut Form,
        c: f64,
        i: usize,
        owner: usize,
        depth: usize,
    ) -> Result<(), EngineError> {
        let l = self.layout;
        let el = &self.circuit.elements[i];
        let on = || l.bit_of[i].is_some_and(|b| self.topology.is_on(b));
        let conductance = |f: &mut Form, g: f64| {
            self.node(f, c * g, el.a);
            self.node(f, -c * g, el.b);
        };
        match &el.kind {
            ElementKind::Resistor { ohms } => conductance(f, 1.0 / ohms),
            ElementKind::Switch { params, .. } => {
                conductance(f, 1.0 / if on() { params.r_on } else { params.r_off })
            }
            ElementKind::Diode { params } if on() => {
                conductance(f, 1.0 / params.r_on);
                f.z.push((l.one(), -c * params.vf / params.r_on));
            }
            ElementKind::Diode { params } => conductance(f, 1.0 / params.r_off),
            ElementKind::Inductor { .. } => f.z.push((l.state_of[i].unwrap_or(0), c)),
            ElementKind::CurrentSource { .. } => f.z.push((l.source_of[i].unwrap_or(0), c)),
            ElementKind::BlockCurrentSource { block, output } => {
                let b = &self.circuit.blocks[block.0];
                for (j, &v) in
                    b.c.get(*output)
                        .map(Vec::as_slice)
                        .unwrap_or(&[])
                        .iter()
                        .enumerate()
                {
                    f.z.push((l.block_offset[block.0] + j, c * v));
                }
            }
            ElementKind::ControlledCurrentSource { control } => {
                let inner = self.signal(control, owner, depth + 1)?;
                f.unknowns
                    .extend(inner.unknowns.iter().map(|&(u, v)| (u, v * c)));
                f.z.extend(inner.z.iter().map(|&(u, v)| (u, v * c)));
            }
            ElementKind::Capacitor { .. }
            | ElementKind::VoltageSource { .. }
            | ElementKind::BlockVoltageSource { .. }
            | ElementKind::ControlledVoltageSource { .. } => {
                f.unknowns.push((l.branch_of[i].unwrap_or(0), c))
            }
            ElementKind::Transformer { .. } => {
                return Err(self.bad(owner, "a transformer's current is per winding"))
            }
        }
        Ok(())
    }

    fn bad(&self, owner: usize, problem: &str) -> EngineError {
        EngineError::BadReference {
            element: self.circuit.elements[owner].name.clone(),
            problem: problem.into(),
        }
    }
}
