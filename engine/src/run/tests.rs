//! Unit checks of the settling function shared by both paths.

use super::*;
use crate::circuit::{DiodeParams, NodeId, SwitchParams};
use crate::waveform::Waveform;

/// A buck power stage with the switch open and 1 A in the inductor: the freewheel
/// diode must conduct (Kirchhoff's current law at the switch node: the inductor
/// current has no other path but the off-state resistances).
fn open_buck() -> (System, ElementId, ElementId) {
    let mut c = Circuit::new();
    let (vin, sw, out) = (c.node("in"), c.node("sw"), c.node("out"));
    let g = NodeId::GROUND;
    c.voltage_source("V", vin, g, Waveform::Constant(12.0))
        .unwrap();
    let (r_on, r_off) = (0.01, 1e6);
    let s = c
        .switch("S", vin, sw, SwitchParams { r_on, r_off }, false)
        .unwrap();
    let vf = 0.5;
    let d = c
        .diode("D", g, sw, DiodeParams { vf, r_on, r_off })
        .unwrap();
    c.inductor("L", sw, out, 1e-4, 1.0).unwrap();
    c.resistor("R", out, g, 1.0).unwrap();
    let grid = TimeGrid::new(1e-6, 1e-6).unwrap();
    (
        System::new(c, Observation::default(), grid, 8).unwrap(),
        s,
        d,
    )
}

/// Settles the diodes of `topo` at `z`, time 0, with fresh scratch buffers.
fn settle(
    system: &mut System,
    topo: &mut Arc<TopologyData>,
    z: &DVector<f64>,
    flipped: &mut Vec<ElementId>,
) {
    let (mut visited, mut g) = (Vec::new(), vec![0.0; system.diode_count()]);
    settle_diodes(system, topo, z, 0.0, &mut visited, flipped, &mut g).unwrap();
}

#[test]
fn settling_reports_only_its_own_flips() {
    // Regression: `flipped` used to keep entries from earlier settles (gate changes
    // with no located event in between clear nothing), so it grew by one entry per
    // gate-driven diode flip for a whole run and misnamed the elements of
    // inconsistent-diode and storm errors.
    let (mut system, s, d) = open_buck();
    let mut topo = system.topology(initial_topology(&system)).unwrap();
    let z = initial_state(&system);
    let mut flipped = vec![s, s];
    settle(&mut system, &mut topo, &z, &mut flipped);
    assert_eq!(flipped, vec![d]);
    let bit = system.layout().bit_of[d.index()].unwrap();
    assert!(topo.topology.is_on(bit));
    // Already consistent: nothing flips, and nothing stale remains.
    settle(&mut system, &mut topo, &z, &mut flipped);
    assert!(flipped.is_empty());
}
