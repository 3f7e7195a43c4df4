//! Structural checks made once per circuit, before any topology is built.
//!
//! Nodal analysis replaces each capacitor by a voltage source and each inductor by a
//! current source. A loop of capacitors and voltage sources, or a cut-set of inductors
//! and current sources, makes one state a combination of the others and the nodal
//! equations singular in every topology. Both are found here on the graph, so the error
//! can name the elements (Chua & Lin, *Computer-Aided Analysis of Electronic Circuits*,
//! ch. on state equations: the "normal tree" construction).
//!
//! Switches and diodes are resistive in both states, so they never open a cut-set.

use crate::circuit::{Circuit, ElementKind, NodeId};
use crate::error::EngineError;

/// Disjoint sets over node indices, with path halving.
struct Dsu(Vec<usize>);

impl Dsu {
    fn new(n: usize) -> Self {
        Dsu((0..n).collect())
    }
    fn find(&mut self, mut i: usize) -> usize {
        while self.0[i] != i {
            self.0[i] = self.0[self.0[i]];
            i = self.0[i];
        }
        i
    }
    /// Joins the sets; false when they were already one.
    fn union(&mut self, a: usize, b: usize) -> bool {
        let (ra, rb) = (self.find(a), self.find(b));
        if ra == rb {
            return false;
        }
        self.0[ra] = rb;
        true
    }
}

/// How an element behaves in the graph checks.
enum EdgeClass {
    /// Fixes the voltage across it (capacitor, voltage source).
    Voltage,
    /// Fixes the current through it (inductor, current source).
    Current,
    /// Anything resistive.
    Resistive,
}

fn class(kind: &ElementKind) -> EdgeClass {
    match kind {
        ElementKind::Capacitor { .. }
        | ElementKind::VoltageSource { .. }
        | ElementKind::BlockVoltageSource { .. }
        | ElementKind::ControlledVoltageSource { .. } => EdgeClass::Voltage,
        ElementKind::Inductor { .. }
        | ElementKind::CurrentSource { .. }
        | ElementKind::BlockCurrentSource { .. }
        | ElementKind::ControlledCurrentSource { .. } => EdgeClass::Current,
        _ => EdgeClass::Resistive,
    }
}

/// Every terminal pair that an element connects (transformers: one per winding).
fn edges(kind: &ElementKind, a: NodeId, b: NodeId) -> Vec<(usize, usize)> {
    match kind {
        ElementKind::Transformer { windings } => {
            windings.iter().map(|w| (w.dot.0, w.other.0)).collect()
        }
        _ => vec![(a.0, b.0)],
    }
}

/// Rejects capacitor/voltage-source loops, inductor/current-source cut-sets and
/// floating node groups.
pub fn check_structure(circuit: &Circuit) -> Result<(), EngineError> {
    check_capacitor_loops(circuit)?;
    check_cut_sets(circuit)
}

fn check_capacitor_loops(circuit: &Circuit) -> Result<(), EngineError> {
    let n = circuit.node_names.len();
    let mut dsu = Dsu::new(n);
    // Adjacency of the voltage-type forest built so far, to name the loop's elements.
    let mut forest: Vec<Vec<(usize, usize)>> = vec![Vec::new(); n];
    // Sources first, so the element reported as closing the loop is a capacitor.
    let mut order: Vec<usize> = (0..circuit.elements.len()).collect();
    order.sort_by_key(|&i| !matches!(circuit.elements[i].kind, ElementKind::VoltageSource { .. }));
    for i in order {
        let e = &circuit.elements[i];
        if !matches!(class(&e.kind), EdgeClass::Voltage) {
            continue;
        }
        let (a, b) = (e.a.0, e.b.0);
        if dsu.union(a, b) {
            forest[a].push((b, i));
            forest[b].push((a, i));
            continue;
        }
        let mut elements: Vec<String> = path_in_forest(&forest, a, b)
            .into_iter()
            .map(|k| circuit.elements[k].name.clone())
            .collect();
        elements.push(e.name.clone());
        return Err(EngineError::CapacitorLoop { elements });
    }
    Ok(())
}

/// Element indices along the unique forest path from `from` to `to`.
fn path_in_forest(forest: &[Vec<(usize, usize)>], from: usize, to: usize) -> Vec<usize> {
    let mut came: Vec<Option<(usize, usize)>> = vec![None; forest.len()];
    let mut stack = vec![from];
    let mut seen = vec![false; forest.len()];
    seen[from] = true;
    while let Some(v) = stack.pop() {
        for &(w, el) in &forest[v] {
            if !seen[w] {
                seen[w] = true;
                came[w] = Some((v, el));
                stack.push(w);
            }
        }
    }
    let mut path = Vec::new();
    let mut v = to;
    while let Some((prev, el)) = came[v] {
        path.push(el);
        v = prev;
    }
    path
}

fn check_cut_sets(circuit: &Circuit) -> Result<(), EngineError> {
    let n = circuit.node_names.len();
    // Contract every edge that is not current-type; what stays apart from ground is
    // held only by inductors and current sources, or by nothing.
    let mut dsu = Dsu::new(n);
    for e in &circuit.elements {
        if matches!(class(&e.kind), EdgeClass::Current) {
            continue;
        }
        for (a, b) in edges(&e.kind, e.a, e.b) {
            dsu.union(a, b);
        }
    }
    let ground = dsu.find(0);
    let mut groups: Vec<usize> = (1..n)
        .map(|i| dsu.find(i))
        .filter(|&r| r != ground)
        .collect();
    groups.sort_unstable();
    groups.dedup();
    let Some(&root) = groups.first() else {
        return Ok(());
    };
    let nodes: Vec<String> = (1..n)
        .filter(|&i| dsu.find(i) == root)
        .map(|i| circuit.node_names[i].clone())
        .collect();
    let elements: Vec<String> = circuit
        .elements
        .iter()
        .filter(|e| matches!(class(&e.kind), EdgeClass::Current))
        .filter(|e| (dsu.find(e.a.0) == root) != (dsu.find(e.b.0) == root))
        .map(|e| e.name.clone())
        .collect();
    if elements.is_empty() {
        Err(EngineError::FloatingNodes { nodes })
    } else {
        Err(EngineError::InductorCutSet { elements, nodes })
    }
}
