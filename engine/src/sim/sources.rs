//! The sources' part of each step, kept while the sources hold still.
//!
//! A step is Φ·z = A_x·x + A_u·u with u = [1; w; s]. While every source slope is zero,
//! u does not change from step to step, so A_u·u of a table entry is the same each
//! time the entry is used in a topology: it is kept per (topology, entry) and the
//! product runs over the dynamic states only. Any change of u (a source set, a
//! breakpoint, a ramp in progress) starts a new epoch, which retires every kept part.

use nalgebra::DMatrix;

use crate::ladder::Ladder;
use crate::topology::Topology;

/// Kept parts (direct-mapped by topology and entry).
const KEPT: usize = 256;

/// A_u·u per (topology, entry) for the present epoch of u.
pub(super) struct SourceParts {
    rows: usize,
    keys: Vec<(Topology, usize, u64)>,
    parts: Vec<f64>,
    /// Bumped whenever u changes.
    pub(super) epoch: u64,
    /// Whether some source has a nonzero slope, so u changes at every step.
    pub(super) moving: bool,
}

impl SourceParts {
    /// Room for parts of `rows` rows.
    pub(super) fn new(rows: usize) -> Self {
        SourceParts {
            rows,
            keys: vec![(Topology(u64::MAX), usize::MAX, 0); KEPT],
            parts: vec![0.0; KEPT * rows],
            epoch: 1,
            moving: false,
        }
    }

    /// u changed: `moving` is whether any of `slopes` is nonzero.
    pub(super) fn changed(&mut self, slopes: &[f64]) {
        self.epoch += 1;
        self.moving = slopes.iter().any(|&s| s != 0.0);
    }

    /// A step was taken: with a slope in force, u has moved.
    pub(super) fn stepped(&mut self) {
        if self.moving {
            self.epoch += 1;
        }
    }

    /// A_u·u of entry `entry` of `topology` (`stacked` is its matrix).
    pub(super) fn get(
        &mut self,
        topology: Topology,
        entry: usize,
        ladder: &Ladder,
        stacked: &DMatrix<f64>,
        u: &[f64],
    ) -> &[f64] {
        let key = (topology.0 ^ (entry as u64).wrapping_mul(0x9E37_79B9))
            .wrapping_mul(0x2545_F491_4F6C_DD1D);
        let k = (key >> 56) as usize % KEPT;
        let part = &mut self.parts[k * self.rows..(k + 1) * self.rows];
        if self.keys[k] != (topology, entry, self.epoch) {
            ladder.source_part(stacked, u, part);
            self.keys[k] = (topology, entry, self.epoch);
        }
        part
    }
}
