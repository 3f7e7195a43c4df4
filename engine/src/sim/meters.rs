//! Meters summed lazily. A meter over one step of table entry e from z is zᵀ·W_e·z, and
//! over many steps Σ zᵀ·W_e·z = tr(W_e·Σ z·zᵀ). So each step adds z·zᵀ to a sum kept
//! per (topology, entry), whatever the number of meters (nz(nz+1)/2 products instead
//! of 2·nz² per meter), and the meters are formed from the sums when they are read,
//! which is rare (no meter integral is computed before: `ladder/gramian.rs`). A
//! topology's sums hold its matrices alive; past `limit` topologies the least recently
//! used one's sums are folded into the totals and dropped.

use std::collections::HashMap;
use std::sync::Arc;

use crate::kernel;
use crate::system::TopologyData;
use crate::topology::Topology;

/// The sums of one topology: per table entry a run steps by, Σ z·zᵀ (nz × nz,
/// column-major). A topology's steps take a few of its table's entries (the leading
/// digits of the steps it takes), so each entry's block is made when first used.
struct Sums {
    topo: Arc<TopologyData>,
    /// Per table entry, where its block starts in `blocks` (NONE: no step took it).
    slot: Vec<u32>,
    blocks: Vec<f64>,
    used: u64,
}

/// A table entry no step took.
const NONE: u32 = u32::MAX;

impl Sums {
    fn block(&self, entry: usize, nz: usize) -> Option<&[f64]> {
        let at = self.slot[entry];
        (at != NONE).then(|| &self.blocks[at as usize..at as usize + nz * nz])
    }
}

/// Lazily summed meters.
pub(super) struct MeterSums {
    nz: usize,
    /// Totals of sums already folded in, per meter.
    folded: Vec<f64>,
    sums: Vec<Sums>,
    index: HashMap<u64, usize>,
    /// The topology of the last step and its sums (consecutive steps mostly share one).
    last: Option<(Topology, usize)>,
    limit: usize,
    clock: u64,
    /// Whether steps are summed (off: they are in no meter).
    on: bool,
}

impl MeterSums {
    /// `n` meters over z of length `nz`, sums kept for at most `limit` topologies.
    pub(super) fn new(n: usize, nz: usize, limit: usize) -> Self {
        MeterSums {
            nz,
            folded: vec![0.0; n],
            sums: Vec::new(),
            index: HashMap::new(),
            last: None,
            limit: limit.max(1),
            clock: 0,
            on: true,
        }
    }

    /// Whether there are meters at all.
    pub(super) fn is_empty(&self) -> bool {
        self.folded.is_empty()
    }

    /// Adds z·zᵀ for a step of `entry` in `topo`. The first step in a topology
    /// allocates its sums (as the topology's matrices were allocated when first built).
    pub(super) fn add(&mut self, topo: &Arc<TopologyData>, entry: usize, z: &[f64]) {
        if self.is_empty() || !self.on {
            return;
        }
        self.clock += 1;
        let k = match self.last {
            Some((t, k)) if t == topo.topology => k,
            _ => match self.index.get(&topo.topology.0) {
                Some(&k) => k,
                None => self.open(topo),
            },
        };
        self.last = Some((topo.topology, k));
        let s = &mut self.sums[k];
        s.used = self.clock;
        let nz = self.nz;
        if s.slot[entry] == NONE {
            // A step of an entry this topology has not taken before: one block more,
            // as the topology's own matrices grew when its first step needed them.
            s.slot[entry] = s.blocks.len() as u32;
            s.blocks.resize(s.blocks.len() + nz * nz, 0.0);
        }
        let at = s.slot[entry] as usize;
        kernel::add_outer(z, &mut s.blocks[at..at + nz * nz]);
    }

    fn open(&mut self, topo: &Arc<TopologyData>) -> usize {
        if self.sums.len() >= self.limit {
            self.last = None;
            let oldest = (0..self.sums.len())
                .min_by_key(|&k| self.sums[k].used)
                .unwrap_or(0);
            let gone = self.sums.swap_remove(oldest);
            fold(&gone, self.nz, &mut self.folded);
            self.index.remove(&gone.topo.topology.0);
            if let Some(moved) = self.sums.get(oldest) {
                self.index.insert(moved.topo.topology.0, oldest);
            }
        }
        let entries = topo.ladder().entry_count();
        self.sums.push(Sums {
            topo: Arc::clone(topo),
            slot: vec![NONE; entries],
            blocks: Vec::new(),
            used: self.clock,
        });
        let k = self.sums.len() - 1;
        self.index.insert(topo.topology.0, k);
        k
    }

    /// Sums the steps from now on (`true`) or leaves them out of every meter.
    pub(super) fn set_on(&mut self, on: bool) {
        self.on = on;
    }

    /// Every meter's integral so far.
    pub(super) fn totals(&self) -> Vec<f64> {
        let mut out = self.folded.clone();
        for s in &self.sums {
            fold(s, self.nz, &mut out);
        }
        out
    }
}

/// Adds every meter's integral over the steps summed in `s` to `out`.
fn fold(s: &Sums, nz: usize, out: &mut [f64]) {
    s.topo.add_meters(|e| s.block(e, nz), out);
}
