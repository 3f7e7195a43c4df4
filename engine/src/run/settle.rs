//! Diode settling: the rule that decides which diodes conduct at an instant.

use std::sync::Arc;

use nalgebra::DVector;

use crate::circuit::ElementId;
use crate::error::EngineError;
use crate::system::{System, TopologyData};
use crate::topology::Topology;

/// Brings the diodes to a consistent state at time `time` (seconds): while some
/// diode's switching function is positive, flip the most violated one (the first in
/// layout order on a tie). States (inductor currents, capacitor voltages) do not jump,
/// so only the resistive solution changes. A topology seen twice means no consistent
/// state exists. `flipped` receives the diodes flipped, in order, and `g[..nd]` the
/// switching functions in the settled topology. Shared by the exact path and the
/// reference path ([`crate::reference`]): it is part of the problem, not of a method
/// (see [`crate::run`]).
pub(crate) fn settle_diodes(
    system: &mut System,
    topo: &mut Arc<TopologyData>,
    z: &DVector<f64>,
    time: f64,
    visited: &mut Vec<Topology>,
    flipped: &mut Vec<ElementId>,
    g: &mut [f64],
) -> Result<(), EngineError> {
    visited.clear();
    flipped.clear();
    visited.push(topo.topology);
    let nd = system.diode_count();
    let limit = 4 * nd + 8;
    loop {
        let mut worst: Option<(usize, f64)> = None;
        for (r, gr) in g[..nd].iter_mut().enumerate() {
            *gr = topo.value(r, z);
            if *gr > 0.0 && worst.is_none_or(|(_, w)| *gr > w) {
                worst = Some((r, *gr));
            }
        }
        let Some((r, _)) = worst else { return Ok(()) };
        let bit = system.layout.diode_bits[r];
        let next = topo.topology.with(bit, !topo.topology.is_on(bit));
        flipped.push(system.layout.switchable[bit]);
        if visited.contains(&next) || visited.len() > limit {
            // The greedy rule cycles; a consistent state may still exist among the
            // diodes it kept flipping, so try their combinations before giving up.
            return match search_consistent(system, visited[0], flipped, z)? {
                Some(found) => {
                    *topo = system.topology(found)?;
                    for (r, gr) in g[..nd].iter_mut().enumerate() {
                        *gr = topo.value(r, z);
                    }
                    Ok(())
                }
                None => Err(inconsistent(system, visited, flipped, next, time)),
            };
        }
        visited.push(next);
        *topo = system.topology(next)?;
    }
}

/// Most diodes whose combinations [`search_consistent`] tries (2^10 nodal solves).
const MAX_SEARCHED_DIODES: usize = 10;

/// Tries every on/off combination of the diodes in `flipped` on top of `start`, fewest
/// changes first (then in bit order, so the result is deterministic), and returns the
/// first topology in which no diode wants to change. Only nodal solves are needed, no
/// exponentials; this runs only when the greedy rule has cycled.
fn search_consistent(
    system: &System,
    start: Topology,
    flipped: &[ElementId],
    z: &DVector<f64>,
) -> Result<Option<Topology>, EngineError> {
    let mut bits: Vec<usize> = flipped
        .iter()
        .filter_map(|e| system.layout.bit_of[e.0])
        .collect();
    bits.sort_unstable();
    bits.dedup();
    if bits.len() > MAX_SEARCHED_DIODES {
        return Ok(None);
    }
    let mut masks: Vec<u32> = (1..1u32 << bits.len()).collect();
    masks.sort_by_key(|m| (m.count_ones(), *m));
    for mask in masks {
        let mut t = start;
        for (k, &bit) in bits.iter().enumerate() {
            if mask >> k & 1 == 1 {
                t = t.with(bit, !start.is_on(bit));
            }
        }
        if system.diode_functions(t, z)?.iter().all(|&g| g <= 0.0) {
            return Ok(Some(t));
        }
    }
    Ok(None)
}

fn inconsistent(
    system: &System,
    visited: &[Topology],
    flipped: &[ElementId],
    repeated: Topology,
    time: f64,
) -> EngineError {
    // visited[k] is the topology before flip k: the cycle is the flips from the first
    // visit of the repeated topology on.
    let first = visited.iter().position(|&t| t == repeated).unwrap_or(0);
    let mut elements: Vec<String> = flipped[first.min(flipped.len())..]
        .iter()
        .map(|e| system.circuit.elements[e.0].name.clone())
        .collect();
    elements.sort();
    elements.dedup();
    EngineError::InconsistentDiodes { time, elements }
}
