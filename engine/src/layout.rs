//! Where everything lives: the augmented state vector and the nodal unknowns.
//!
//! The augmented state is `z = [x ; 1 ; w ; s]`:
//! - `x`: inductor currents, capacitor voltages, behavioural block states;
//! - `1`: a constant, which carries diode thresholds and other offsets;
//! - `w`: present value of each independent source; `s`: its slope.
//!
//! With ẇ = s and ṡ = 0 a piecewise-linear source is integrated exactly by the same
//! matrix exponential as the circuit (Van Loan, "Computing integrals involving the
//! matrix exponential", IEEE TAC 23(3), 1978: augmenting the input's own dynamics).

use crate::circuit::{BlockId, Circuit, ElementId, ElementKind};
use crate::error::EngineError;

/// What one entry of `x` is.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum StateKind {
    /// Current through an inductor, a → b, amperes.
    InductorCurrent(ElementId),
    /// Voltage across a capacitor, v(a) − v(b), volts.
    CapacitorVoltage(ElementId),
    /// State `k` of a behavioural block.
    Block(BlockId, usize),
}

/// Index maps shared by every topology of one circuit.
#[derive(Clone, Debug)]
pub struct Layout {
    /// Meaning of each entry of `x`.
    pub states: Vec<StateKind>,
    /// Independent sources in `w` order.
    pub sources: Vec<ElementId>,
    /// Switches and diodes; bit k of a topology is the state of `switchable[k]`.
    pub switchable: Vec<ElementId>,
    /// Diodes only, as positions in `switchable`.
    pub diode_bits: Vec<usize>,
    /// First state index of each block.
    pub block_offset: Vec<usize>,
    /// Index of each element's state in `x`, if it has one.
    pub state_of: Vec<Option<usize>>,
    /// Index of each element's source value in `z`, if it is an independent source.
    pub source_of: Vec<Option<usize>>,
    /// Bit of each switchable element.
    pub bit_of: Vec<Option<usize>>,
    /// First nodal branch unknown of each voltage-type element or transformer.
    pub branch_of: Vec<Option<usize>>,
    /// Number of nodal unknowns: non-ground nodes plus branch currents.
    pub nodal_size: usize,
}

/// Most switches plus diodes a topology bit mask can hold.
pub const MAX_SWITCHABLE: usize = 64;

impl Layout {
    /// Builds the index maps of a circuit.
    pub fn new(circuit: &Circuit) -> Result<Self, EngineError> {
        let n_el = circuit.elements.len();
        let mut layout = Layout {
            states: Vec::new(),
            sources: Vec::new(),
            switchable: Vec::new(),
            diode_bits: Vec::new(),
            block_offset: Vec::new(),
            state_of: vec![None; n_el],
            source_of: vec![None; n_el],
            bit_of: vec![None; n_el],
            branch_of: vec![None; n_el],
            nodal_size: circuit.node_names.len() - 1,
        };
        for (i, e) in circuit.elements.iter().enumerate() {
            let id = ElementId(i);
            match &e.kind {
                ElementKind::Inductor { .. } => {
                    layout.state_of[i] = Some(layout.states.len());
                    layout.states.push(StateKind::InductorCurrent(id));
                }
                ElementKind::Capacitor { .. } => {
                    layout.state_of[i] = Some(layout.states.len());
                    layout.states.push(StateKind::CapacitorVoltage(id));
                    layout.branch_of[i] = Some(layout.take_branches(1));
                }
                ElementKind::VoltageSource { .. } => {
                    layout.sources.push(id);
                    layout.branch_of[i] = Some(layout.take_branches(1));
                }
                ElementKind::CurrentSource { .. } => layout.sources.push(id),
                ElementKind::BlockVoltageSource { .. }
                | ElementKind::ControlledVoltageSource { .. } => {
                    layout.branch_of[i] = Some(layout.take_branches(1));
                }
                ElementKind::Transformer { windings } => {
                    layout.branch_of[i] = Some(layout.take_branches(windings.len()));
                }
                ElementKind::Switch { .. } | ElementKind::Diode { .. } => {
                    if matches!(e.kind, ElementKind::Diode { .. }) {
                        layout.diode_bits.push(layout.switchable.len());
                    }
                    layout.bit_of[i] = Some(layout.switchable.len());
                    layout.switchable.push(id);
                }
                ElementKind::Resistor { .. }
                | ElementKind::BlockCurrentSource { .. }
                | ElementKind::ControlledCurrentSource { .. } => {}
            }
        }
        if layout.switchable.len() > MAX_SWITCHABLE {
            return Err(EngineError::BadReference {
                element: circuit.elements[layout.switchable[MAX_SWITCHABLE].0]
                    .name
                    .clone(),
                problem: format!("more than {MAX_SWITCHABLE} switches and diodes in one circuit"),
            });
        }
        for (b, block) in circuit.blocks.iter().enumerate() {
            layout.block_offset.push(layout.states.len());
            for k in 0..block.a.len() {
                layout.states.push(StateKind::Block(BlockId(b), k));
            }
        }
        for (k, src) in layout.sources.clone().into_iter().enumerate() {
            layout.source_of[src.0] = Some(layout.w(k));
        }
        Ok(layout)
    }

    fn take_branches(&mut self, n: usize) -> usize {
        let first = self.nodal_size;
        self.nodal_size += n;
        first
    }

    /// Number of circuit and block states.
    pub fn nx(&self) -> usize {
        self.states.len()
    }

    /// Index of the constant 1 in `z`.
    pub fn one(&self) -> usize {
        self.nx()
    }

    /// Index in `z` of the value of source `k` (in `sources` order).
    pub fn w(&self, k: usize) -> usize {
        self.nx() + 1 + k
    }

    /// Index in `z` of the slope of source `k`.
    pub fn s(&self, k: usize) -> usize {
        self.nx() + 1 + self.sources.len() + k
    }

    /// Length of the augmented state.
    pub fn nz(&self) -> usize {
        self.nx() + 1 + 2 * self.sources.len()
    }

    /// Nodal unknown of a node, `None` for ground.
    pub fn node_unknown(&self, node: crate::circuit::NodeId) -> Option<usize> {
        node.0.checked_sub(1)
    }
}
