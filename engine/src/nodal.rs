//! Nodal analysis of one topology: from the circuit and the on/off state of every
//! switch and diode to the matrices of ż = M z and of any circuit quantity as a row
//! over z.
//!
//! Method: modified nodal analysis of the resistive network obtained by replacing each
//! capacitor by a voltage source (its voltage is a state) and each inductor by a current
//! source (its current is a state) — see e.g. Chua & Lin, *Computer-Aided Analysis of
//! Electronic Circuits*, on the formulation of state equations. Every right-hand side is
//! linear in z, so one LU factorisation and a solve with nz right-hand sides give the
//! nodal unknowns as `S z`; derivatives and observed quantities are rows of S.

use nalgebra::{DMatrix, DVector, RowDVector};

use crate::circuit::{Circuit, ElementKind, NodeId, Quantity, Signal};
use crate::controlled::Forms;
use crate::error::EngineError;
use crate::layout::{Layout, StateKind};
use crate::topology::Topology;

/// Nodal solution of one topology: unknowns = `solution * z`.
pub struct Nodal<'a> {
    circuit: &'a Circuit,
    layout: &'a Layout,
    topology: Topology,
    solution: DMatrix<f64>,
}

/// Depth limit when block outputs feed other blocks' inputs through feedthrough.
const MAX_FEEDTHROUGH_DEPTH: usize = 16;

impl<'a> Nodal<'a> {
    /// Assembles and solves the nodal equations of `topology`.
    pub fn solve(
        circuit: &'a Circuit,
        layout: &'a Layout,
        topology: Topology,
    ) -> Result<Self, EngineError> {
        let n = layout.nodal_size;
        let nz = layout.nz();
        let mut m = DMatrix::<f64>::zeros(n, n);
        let mut rhs = DMatrix::<f64>::zeros(n, nz);
        let mut asm = Assembler {
            layout,
            m: &mut m,
            rhs: &mut rhs,
        };
        for (i, e) in circuit.elements.iter().enumerate() {
            asm.element(circuit, i, e.a, e.b, &e.kind, topology)?;
        }
        let singular = || EngineError::SingularTopology {
            topology: topology.describe(circuit, layout),
        };
        // With no unknowns (only ground, e.g. a circuit of behavioural blocks alone)
        // there is nothing to solve.
        if n > 0 {
            let solved = crate::lu::solve_in_place(m.as_mut_slice(), n, rhs.as_mut_slice(), nz);
            if !solved || rhs.iter().any(|v| !v.is_finite()) {
                return Err(singular());
            }
        }
        Ok(Nodal {
            circuit,
            layout,
            topology,
            solution: rhs,
        })
    }

    fn unknown_row(&self, k: usize) -> RowDVector<f64> {
        self.solution.row(k).into_owned()
    }

    fn node_row(&self, node: NodeId) -> RowDVector<f64> {
        match self.layout.node_unknown(node) {
            Some(k) => self.unknown_row(k),
            None => RowDVector::zeros(self.layout.nz()),
        }
    }

    fn unit(&self, index: usize) -> RowDVector<f64> {
        let mut r = RowDVector::zeros(self.layout.nz());
        r[index] = 1.0;
        r
    }

    /// Row over z giving `quantity` in this topology.
    pub fn quantity(&self, q: Quantity) -> Result<RowDVector<f64>, EngineError> {
        self.quantity_at_depth(q, 0)
    }

    /// Row over z giving the signal in this topology.
    pub fn signal(&self, s: &Signal) -> Result<RowDVector<f64>, EngineError> {
        self.signal_at_depth(s, 0)
    }

    fn signal_at_depth(&self, s: &Signal, depth: usize) -> Result<RowDVector<f64>, EngineError> {
        let mut row = RowDVector::zeros(self.layout.nz());
        for &(c, q) in &s.terms {
            row += self.quantity_at_depth(q, depth)? * c;
        }
        Ok(row)
    }

    fn quantity_at_depth(&self, q: Quantity, depth: usize) -> Result<RowDVector<f64>, EngineError> {
        let l = self.layout;
        Ok(match q {
            Quantity::One => self.unit(l.one()),
            Quantity::NodeVoltage(n) => self.node_row(n),
            Quantity::Voltage(e) => {
                let el = &self.circuit.elements[e.0];
                self.node_row(el.a) - self.node_row(el.b)
            }
            Quantity::Current(e) => self.current(e.0, depth)?,
            Quantity::WindingCurrent(e, k) => {
                match (&self.circuit.elements[e.0].kind, l.branch_of[e.0]) {
                    (ElementKind::Transformer { windings }, Some(first)) if k < windings.len() => {
                        self.unknown_row(first + k)
                    }
                    _ => return Err(bad_ref(self.circuit, e.0, format!("has no winding {k}"))),
                }
            }
            Quantity::BlockState(b, k) => {
                let block = self.circuit.blocks.get(b.0).filter(|bl| k < bl.a.len());
                match block {
                    Some(_) => self.unit(l.block_offset[b.0] + k),
                    None => return Err(bad_block(self.circuit, b.0, format!("has no state {k}"))),
                }
            }
            Quantity::BlockOutput(b, k) => self.block_output(b.0, k, depth)?,
        })
    }

    fn current(&self, i: usize, depth: usize) -> Result<RowDVector<f64>, EngineError> {
        let l = self.layout;
        let el = &self.circuit.elements[i];
        let v = || self.node_row(el.a) - self.node_row(el.b);
        Ok(match &el.kind {
            ElementKind::Resistor { ohms } => v() / *ohms,
            ElementKind::Switch { params, .. } => {
                let on = self.topology.is_on(l.bit_of[i].unwrap_or(0));
                v() / if on { params.r_on } else { params.r_off }
            }
            ElementKind::Diode { params } => {
                if self.topology.is_on(l.bit_of[i].unwrap_or(0)) {
                    (v() - self.unit(l.one()) * params.vf) / params.r_on
                } else {
                    v() / params.r_off
                }
            }
            ElementKind::Inductor { .. } => self.unit(l.state_of[i].unwrap_or(0)),
            ElementKind::CurrentSource { .. } => self.unit(l.source_of[i].unwrap_or(0)),
            ElementKind::BlockCurrentSource { block, output } => {
                self.block_output(block.0, *output, depth)?
            }
            ElementKind::ControlledCurrentSource { control } => {
                self.signal_at_depth(control, depth + 1)?
            }
            ElementKind::Capacitor { .. }
            | ElementKind::VoltageSource { .. }
            | ElementKind::BlockVoltageSource { .. }
            | ElementKind::ControlledVoltageSource { .. } => {
                self.unknown_row(l.branch_of[i].unwrap_or(0))
            }
            ElementKind::Transformer { .. } => {
                return Err(bad_ref(
                    self.circuit,
                    i,
                    "a transformer's current is per winding".into(),
                ))
            }
        })
    }

    fn block_output(
        &self,
        b: usize,
        k: usize,
        depth: usize,
    ) -> Result<RowDVector<f64>, EngineError> {
        let Some(block) = self.circuit.blocks.get(b) else {
            return Err(bad_block(self.circuit, b, "does not exist".into()));
        };
        if k >= block.c.len() {
            return Err(bad_block(self.circuit, b, format!("has no output {k}")));
        }
        if depth > MAX_FEEDTHROUGH_DEPTH {
            return Err(bad_block(
                self.circuit,
                b,
                "block feedthrough forms an algebraic loop".into(),
            ));
        }
        let offset = self.layout.block_offset[b];
        let mut row = RowDVector::zeros(self.layout.nz());
        for (j, c) in block.c[k].iter().enumerate() {
            row[offset + j] += c;
        }
        if let Some(d) = block.d.get(k) {
            for (j, &dj) in d.iter().enumerate() {
                if dj != 0.0 {
                    row += self.signal_at_depth(&block.inputs[j], depth + 1)? * dj;
                }
            }
        }
        Ok(row)
    }

    /// The augmented state matrix M with ż = M z in this topology.
    pub fn state_matrix(&self) -> Result<DMatrix<f64>, EngineError> {
        let l = self.layout;
        let nz = l.nz();
        let mut a = DMatrix::<f64>::zeros(nz, nz);
        for (k, st) in l.states.iter().enumerate() {
            match *st {
                StateKind::InductorCurrent(e) => {
                    let el = &self.circuit.elements[e.0];
                    let ElementKind::Inductor { henries, .. } = el.kind else {
                        continue;
                    };
                    a.set_row(k, &((self.node_row(el.a) - self.node_row(el.b)) / henries));
                }
                StateKind::CapacitorVoltage(e) => {
                    let ElementKind::Capacitor { farads, .. } = self.circuit.elements[e.0].kind
                    else {
                        continue;
                    };
                    a.set_row(k, &(self.current(e.0, 0)? / farads));
                }
                StateKind::Block(b, j) => {
                    let block = &self.circuit.blocks[b.0];
                    let off = l.block_offset[b.0];
                    let mut row = RowDVector::zeros(nz);
                    for (m, &v) in block.a[j].iter().enumerate() {
                        row[off + m] += v;
                    }
                    for (m, &v) in block.b[j].iter().enumerate() {
                        if v != 0.0 {
                            row += self.signal(&block.inputs[m])? * v;
                        }
                    }
                    a.set_row(k, &row);
                }
            }
        }
        for k in 0..l.sources.len() {
            a[(l.w(k), l.s(k))] = 1.0;
        }
        Ok(a)
    }

    /// Evaluates a row at a state (convenience for tests and settling).
    pub fn eval(row: &RowDVector<f64>, z: &DVector<f64>) -> f64 {
        row.dot(&z.transpose())
    }
}

fn bad_ref(circuit: &Circuit, element: usize, problem: String) -> EngineError {
    EngineError::BadReference {
        element: circuit.elements[element].name.clone(),
        problem,
    }
}

fn bad_block(circuit: &Circuit, block: usize, problem: String) -> EngineError {
    let element = circuit
        .blocks
        .get(block)
        .map_or_else(|| format!("block #{block}"), |b| b.name.clone());
    EngineError::BadReference { element, problem }
}

/// Stamps elements into the nodal matrix and the right-hand side over z.
struct Assembler<'m> {
    layout: &'m Layout,
    m: &'m mut DMatrix<f64>,
    rhs: &'m mut DMatrix<f64>,
}

impl Assembler<'_> {
    fn conductance(&mut self, a: NodeId, b: NodeId, g: f64) {
        let (ia, ib) = (self.layout.node_unknown(a), self.layout.node_unknown(b));
        if let Some(i) = ia {
            self.m[(i, i)] += g;
        }
        if let Some(j) = ib {
            self.m[(j, j)] += g;
        }
        if let (Some(i), Some(j)) = (ia, ib) {
            self.m[(i, j)] -= g;
            self.m[(j, i)] -= g;
        }
    }

    /// A current `coef · z[col]` leaving node a and entering node b.
    fn current_source(&mut self, a: NodeId, b: NodeId, col: usize, coef: f64) {
        if let Some(i) = self.layout.node_unknown(a) {
            self.rhs[(i, col)] -= coef;
        }
        if let Some(j) = self.layout.node_unknown(b) {
            self.rhs[(j, col)] += coef;
        }
    }

    /// Branch unknown `br` carries current a → b; KCL gets ±1 and row `br` the
    /// constraint v(a) − v(b) − (values on the right).
    fn voltage_branch(&mut self, a: NodeId, b: NodeId, br: usize) {
        if let Some(i) = self.layout.node_unknown(a) {
            self.m[(i, br)] += 1.0;
            self.m[(br, i)] += 1.0;
        }
        if let Some(j) = self.layout.node_unknown(b) {
            self.m[(j, br)] -= 1.0;
            self.m[(br, j)] -= 1.0;
        }
    }

    fn element(
        &mut self,
        circuit: &Circuit,
        i: usize,
        a: NodeId,
        b: NodeId,
        kind: &ElementKind,
        topology: Topology,
    ) -> Result<(), EngineError> {
        let l = self.layout;
        let on = || l.bit_of[i].is_some_and(|bit| topology.is_on(bit));
        match kind {
            ElementKind::Resistor { ohms } => self.conductance(a, b, 1.0 / ohms),
            ElementKind::Switch { params, .. } => {
                self.conductance(a, b, 1.0 / if on() { params.r_on } else { params.r_off })
            }
            ElementKind::Diode { params } => {
                if on() {
                    let g = 1.0 / params.r_on;
                    self.conductance(a, b, g);
                    // Norton form of vf in series with r_on: a constant current vf/r_on.
                    self.current_source(a, b, l.one(), -g * params.vf);
                } else {
                    self.conductance(a, b, 1.0 / params.r_off);
                }
            }
            ElementKind::Inductor { .. } => {
                self.current_source(a, b, l.state_of[i].unwrap_or(0), 1.0)
            }
            ElementKind::CurrentSource { .. } => {
                self.current_source(a, b, l.source_of[i].unwrap_or(0), 1.0)
            }
            ElementKind::BlockCurrentSource { block, output } => {
                for (col, coef) in block_columns(circuit, l, i, block.0, *output)? {
                    self.current_source(a, b, col, coef);
                }
            }
            ElementKind::Capacitor { .. } => {
                let br = l.branch_of[i].unwrap_or(0);
                self.voltage_branch(a, b, br);
                self.rhs[(br, l.state_of[i].unwrap_or(0))] += 1.0;
            }
            ElementKind::VoltageSource { .. } => {
                let br = l.branch_of[i].unwrap_or(0);
                self.voltage_branch(a, b, br);
                self.rhs[(br, l.source_of[i].unwrap_or(0))] += 1.0;
            }
            ElementKind::BlockVoltageSource { block, output } => {
                let br = l.branch_of[i].unwrap_or(0);
                self.voltage_branch(a, b, br);
                for (col, coef) in block_columns(circuit, l, i, block.0, *output)? {
                    self.rhs[(br, col)] += coef;
                }
            }
            ElementKind::Transformer { windings } => {
                self.transformer(l.branch_of[i].unwrap_or(0), windings)
            }
            ElementKind::ControlledVoltageSource { control } => {
                let br = l.branch_of[i].unwrap_or(0);
                self.voltage_branch(a, b, br);
                // v(a) − v(b) − Σ c·unknown = Σ c·z
                let form = Forms {
                    circuit,
                    layout: l,
                    topology,
                }
                .signal(control, i, 0)?;
                for (u, c) in form.unknowns {
                    self.m[(br, u)] -= c;
                }
                for (col, c) in form.z {
                    self.rhs[(br, col)] += c;
                }
            }
            ElementKind::ControlledCurrentSource { control } => {
                // The current leaving a: its unknowns part joins the matrix, its state
                // part the right-hand side.
                let form = Forms {
                    circuit,
                    layout: l,
                    topology,
                }
                .signal(control, i, 0)?;
                for (node, sign) in [(a, 1.0), (b, -1.0)] {
                    let Some(row) = l.node_unknown(node) else {
                        continue;
                    };
                    for &(u, c) in &form.unknowns {
                        self.m[(row, u)] += sign * c;
                    }
                    for &(col, c) in &form.z {
                        self.rhs[(row, col)] -= sign * c;
                    }
                }
            }
        }
        Ok(())
    }

    /// Ideal transformer: v_k/N_k = v_0/N_0 for k ≥ 1 and Σ N_k i_k = 0.
    fn transformer(&mut self, first: usize, windings: &[crate::circuit::Winding]) {
        let l = self.layout;
        let n0 = windings[0].turns;
        for (k, w) in windings.iter().enumerate() {
            let br = first + k;
            // KCL: the winding current leaves the dotted node.
            if let Some(i) = l.node_unknown(w.dot) {
                self.m[(i, br)] += 1.0;
            }
            if let Some(j) = l.node_unknown(w.other) {
                self.m[(j, br)] -= 1.0;
            }
            // Ampere-turn balance lives in row `first`.
            self.m[(first, br)] += w.turns;
            if k == 0 {
                continue;
            }
            let w0 = &windings[0];
            for (node, coef) in [
                (w.dot, n0),
                (w.other, -n0),
                (w0.dot, -w.turns),
                (w0.other, w.turns),
            ] {
                if let Some(i) = l.node_unknown(node) {
                    self.m[(br, i)] += coef;
                }
            }
        }
    }
}

/// Columns of z and coefficients of a block output that drives a source. Feedthrough
/// would make the source depend on the nodal solution itself, so it is refused.
fn block_columns(
    circuit: &Circuit,
    layout: &Layout,
    element: usize,
    block: usize,
    output: usize,
) -> Result<Vec<(usize, f64)>, EngineError> {
    let Some(bl) = circuit.blocks.get(block) else {
        return Err(bad_ref(
            circuit,
            element,
            format!("drives from missing block #{block}"),
        ));
    };
    let Some(c) = bl.c.get(output) else {
        return Err(bad_ref(
            circuit,
            element,
            format!("block '{}' has no output {output}", bl.name),
        ));
    };
    if bl
        .d
        .get(output)
        .is_some_and(|d| d.iter().any(|&v| v != 0.0))
    {
        return Err(bad_ref(
            circuit,
            element,
            format!(
                "block '{}' output {output} has feedthrough and cannot drive a source",
                bl.name
            ),
        ));
    }
    let off = layout.block_offset[block];
    Ok(c.iter().enumerate().map(|(j, &v)| (off + j, v)).collect())
}
