//! Circuit description: named nodes and the elements between them.
//!
//! A [`Circuit`] is plain data. It is checked and turned into state equations by
//! [`crate::System::new`]; nothing here knows about topologies or time stepping.
//! All values are SI: ohms, henries, farads, volts, amperes, seconds.

use crate::error::EngineError;
use crate::waveform::Waveform;

/// Index of a node. Node 0 is the reference (ground) node of every circuit.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct NodeId(pub(crate) usize);

impl NodeId {
    /// The reference node, at 0 V by definition.
    pub const GROUND: NodeId = NodeId(0);

    /// Position of the node in the circuit's node list.
    pub fn index(self) -> usize {
        self.0
    }
}

/// Index of an element in its circuit.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct ElementId(pub(crate) usize);

impl ElementId {
    /// Position of the element in the circuit's element list.
    pub fn index(self) -> usize {
        self.0
    }
}

/// Index of a behavioural linear block in its circuit.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub struct BlockId(pub(crate) usize);

/// One winding of an ideal transformer: current flows into `dot` and out of `other`.
#[derive(Clone, Debug, PartialEq)]
pub struct Winding {
    /// Dotted terminal.
    pub dot: NodeId,
    /// Undotted terminal.
    pub other: NodeId,
    /// Number of turns (> 0).
    pub turns: f64,
}

/// Parameters of a two-valued resistive diode: conducting, it is `vf` in series
/// with `r_on`; blocking, it is `r_off`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DiodeParams {
    /// Forward threshold voltage, volts.
    pub vf: f64,
    /// On-state series resistance, ohms (> 0).
    pub r_on: f64,
    /// Off-state resistance, ohms (> r_on).
    pub r_off: f64,
}

/// Parameters of a gate-driven switch modelled as a two-valued resistor.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SwitchParams {
    /// On-state resistance, ohms (> 0).
    pub r_on: f64,
    /// Off-state resistance, ohms (> r_on).
    pub r_off: f64,
}

/// What an element is. Two-terminal elements connect `a` (positive) to `b`.
#[derive(Clone, Debug, PartialEq)]
pub enum ElementKind {
    /// Linear resistor.
    Resistor {
        /// Ohms.
        ohms: f64,
    },
    /// Linear inductor.
    Inductor {
        /// Henries.
        henries: f64,
        /// Amperes flowing a → b at t = 0.
        initial_current: f64,
    },
    /// Linear capacitor.
    Capacitor {
        /// Farads.
        farads: f64,
        /// v(a) − v(b) at t = 0, volts.
        initial_voltage: f64,
    },
    /// Independent voltage source: v(a) − v(b) = waveform(t), volts.
    VoltageSource {
        /// Volts over time.
        waveform: Waveform,
    },
    /// Independent current source: the waveform's amperes flow from a, through the
    /// source, into b (it draws current out of node a).
    CurrentSource {
        /// Amperes over time.
        waveform: Waveform,
    },
    /// Voltage source whose value is a behavioural block output.
    BlockVoltageSource {
        /// The driving block.
        block: BlockId,
        /// Which of its outputs.
        output: usize,
    },
    /// Current source (a → b through the source) driven by a block output.
    BlockCurrentSource {
        /// The driving block.
        block: BlockId,
        /// Which of its outputs.
        output: usize,
    },
    /// Voltage source whose value is a circuit signal: v(a) − v(b) = control. The
    /// control may name any quantity, including ones the source itself affects; the
    /// nodal solve resolves the loop (a voltage-controlled or current-controlled
    /// voltage source of textbook nodal analysis).
    ControlledVoltageSource {
        /// The controlling signal, volts.
        control: Signal,
    },
    /// Current source (a → b through the source) whose value is a circuit signal.
    ControlledCurrentSource {
        /// The controlling signal, amperes.
        control: Signal,
    },
    /// Gate-driven switch between a and b.
    Switch {
        /// On and off resistances.
        params: SwitchParams,
        /// Gate state at t = 0.
        initially_on: bool,
    },
    /// Diode, anode a, cathode b.
    Diode {
        /// Threshold and resistances.
        params: DiodeParams,
    },
    /// Ideal multi-winding transformer: volts per turn equal on every winding and
    /// ampere-turns sum to zero. Magnetising and leakage inductance are separate elements.
    Transformer {
        /// Two or more windings; winding 0 is the reference.
        windings: Vec<Winding>,
    },
}

/// A named element and its terminals.
#[derive(Clone, Debug, PartialEq)]
pub struct Element {
    /// Unique name, used in every error and output label.
    pub name: String,
    /// Positive terminal (anode for a diode). Unused by transformers.
    pub a: NodeId,
    /// Negative terminal (cathode for a diode). Unused by transformers.
    pub b: NodeId,
    /// What the element is.
    pub kind: ElementKind,
}

/// A linear combination of circuit quantities, used as block input, output probe or
/// event function. Every quantity is affine in the state for a given topology.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Signal {
    /// (coefficient, quantity) terms, summed.
    pub terms: Vec<(f64, Quantity)>,
}

impl Signal {
    /// A single quantity with coefficient one.
    pub fn of(q: Quantity) -> Self {
        Signal {
            terms: vec![(1.0, q)],
        }
    }

    /// Adds `coefficient × quantity`.
    pub fn plus(mut self, coefficient: f64, q: Quantity) -> Self {
        self.terms.push((coefficient, q));
        self
    }
}

/// A circuit quantity that can be observed.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Quantity {
    /// Node voltage against ground, volts.
    NodeVoltage(NodeId),
    /// Current through a two-terminal element from a to b, amperes. For a transformer,
    /// use [`Quantity::WindingCurrent`].
    Current(ElementId),
    /// v(a) − v(b) of a two-terminal element, volts.
    Voltage(ElementId),
    /// Current into the dotted terminal of winding `winding` of a transformer, amperes.
    WindingCurrent(ElementId, usize),
    /// Output `output` of a behavioural block.
    BlockOutput(BlockId, usize),
    /// State `state` of a behavioural block.
    BlockState(BlockId, usize),
    /// The constant 1 (for offsets).
    One,
}

/// A behavioural linear block: ẋ = A x + B u, y = C x + D u, where each input u_k is a
/// [`Signal`] of the circuit. Outputs that drive sources must not have feedthrough.
#[derive(Clone, Debug, PartialEq)]
pub struct Block {
    /// Unique name, used in errors.
    pub name: String,
    /// State matrix, row-major, `states × states`.
    pub a: Vec<Vec<f64>>,
    /// Input matrix, `states × inputs`.
    pub b: Vec<Vec<f64>>,
    /// Output matrix, `outputs × states`.
    pub c: Vec<Vec<f64>>,
    /// Feedthrough, `outputs × inputs` (all zeros if empty).
    pub d: Vec<Vec<f64>>,
    /// The input signals.
    pub inputs: Vec<Signal>,
    /// Initial state.
    pub initial_state: Vec<f64>,
}

/// A circuit: nodes, elements and behavioural blocks.
#[derive(Clone, Debug, Default)]
pub struct Circuit {
    pub(crate) node_names: Vec<String>,
    pub(crate) elements: Vec<Element>,
    pub(crate) blocks: Vec<Block>,
}

impl Circuit {
    /// An empty circuit holding only the ground node, named `gnd`.
    pub fn new() -> Self {
        Circuit {
            node_names: vec!["gnd".to_string()],
            elements: Vec::new(),
            blocks: Vec::new(),
        }
    }

    /// Returns the node of that name, creating it if needed; `gnd` is ground.
    pub fn node(&mut self, name: &str) -> NodeId {
        if let Some(i) = self.node_names.iter().position(|n| n == name) {
            return NodeId(i);
        }
        self.node_names.push(name.to_string());
        NodeId(self.node_names.len() - 1)
    }

    /// Looks up a node without creating it.
    pub fn find_node(&self, name: &str) -> Option<NodeId> {
        self.node_names.iter().position(|n| n == name).map(NodeId)
    }

    /// Looks up an element by name.
    pub fn find_element(&self, name: &str) -> Option<ElementId> {
        self.elements
            .iter()
            .position(|e| e.name == name)
            .map(ElementId)
    }

    /// Adds an element; names must be unique.
    pub fn add(
        &mut self,
        name: &str,
        a: NodeId,
        b: NodeId,
        kind: ElementKind,
    ) -> Result<ElementId, EngineError> {
        if self.find_element(name).is_some() {
            return Err(EngineError::DuplicateName(name.to_string()));
        }
        self.elements.push(Element {
            name: name.to_string(),
            a,
            b,
            kind,
        });
        Ok(ElementId(self.elements.len() - 1))
    }

    /// Adds a resistor of `ohms`.
    pub fn resistor(
        &mut self,
        name: &str,
        a: NodeId,
        b: NodeId,
        ohms: f64,
    ) -> Result<ElementId, EngineError> {
        self.add(name, a, b, ElementKind::Resistor { ohms })
    }

    /// Adds an inductor of `henries` carrying `initial_current` amperes a → b.
    pub fn inductor(
        &mut self,
        name: &str,
        a: NodeId,
        b: NodeId,
        henries: f64,
        initial_current: f64,
    ) -> Result<ElementId, EngineError> {
        self.add(
            name,
            a,
            b,
            ElementKind::Inductor {
                henries,
                initial_current,
            },
        )
    }

    /// Adds a capacitor of `farads` charged to `initial_voltage` volts.
    pub fn capacitor(
        &mut self,
        name: &str,
        a: NodeId,
        b: NodeId,
        farads: f64,
        initial_voltage: f64,
    ) -> Result<ElementId, EngineError> {
        self.add(
            name,
            a,
            b,
            ElementKind::Capacitor {
                farads,
                initial_voltage,
            },
        )
    }

    /// Adds an independent voltage source.
    pub fn voltage_source(
        &mut self,
        name: &str,
        a: NodeId,
        b: NodeId,
        waveform: Waveform,
    ) -> Result<ElementId, EngineError> {
        self.add(name, a, b, ElementKind::VoltageSource { waveform })
    }

    /// Adds an independent current source (draws current out of `a`, into `b`).
    pub fn current_source(
        &mut self,
        name: &str,
        a: NodeId,
        b: NodeId,
        waveform: Waveform,
    ) -> Result<ElementId, EngineError> {
        self.add(name, a, b, ElementKind::CurrentSource { waveform })
    }

    /// Adds a voltage source controlled by a circuit signal.
    pub fn controlled_voltage_source(
        &mut self,
        name: &str,
        a: NodeId,
        b: NodeId,
        control: Signal,
    ) -> Result<ElementId, EngineError> {
        self.add(name, a, b, ElementKind::ControlledVoltageSource { control })
    }

    /// Adds a current source (a → b through it) controlled by a circuit signal.
    pub fn controlled_current_source(
        &mut self,
        name: &str,
        a: NodeId,
        b: NodeId,
        control: Signal,
    ) -> Result<ElementId, EngineError> {
        self.add(name, a, b, ElementKind::ControlledCurrentSource { control })
    }

    /// Adds a gate-driven switch.
    pub fn switch(
        &mut self,
        name: &str,
        a: NodeId,
        b: NodeId,
        params: SwitchParams,
        initially_on: bool,
    ) -> Result<ElementId, EngineError> {
        self.add(
            name,
            a,
            b,
            ElementKind::Switch {
                params,
                initially_on,
            },
        )
    }

    /// Adds a diode from `anode` to `cathode`.
    pub fn diode(
        &mut self,
        name: &str,
        anode: NodeId,
        cathode: NodeId,
        params: DiodeParams,
    ) -> Result<ElementId, EngineError> {
        self.add(name, anode, cathode, ElementKind::Diode { params })
    }

    /// Adds an ideal transformer with the given windings.
    pub fn transformer(
        &mut self,
        name: &str,
        windings: Vec<Winding>,
    ) -> Result<ElementId, EngineError> {
        self.add(
            name,
            NodeId::GROUND,
            NodeId::GROUND,
            ElementKind::Transformer { windings },
        )
    }

    /// Adds a behavioural linear block.
    pub fn block(&mut self, block: Block) -> Result<BlockId, EngineError> {
        if self.blocks.iter().any(|b| b.name == block.name) {
            return Err(EngineError::DuplicateName(block.name));
        }
        self.blocks.push(block);
        Ok(BlockId(self.blocks.len() - 1))
    }

    /// The elements, in insertion order.
    pub fn elements(&self) -> &[Element] {
        &self.elements
    }

    /// One element.
    pub fn element(&self, id: ElementId) -> &Element {
        &self.elements[id.0]
    }

    /// Node names; index 0 is ground.
    pub fn node_names(&self) -> &[String] {
        &self.node_names
    }

    /// Name of one node.
    pub fn node_name(&self, id: NodeId) -> &str {
        &self.node_names[id.0]
    }

    /// The behavioural blocks.
    pub fn blocks(&self) -> &[Block] {
        &self.blocks
    }
}
