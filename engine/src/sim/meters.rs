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

/// The sums of one topology: per table entry, Σ z·zᵀ (nz × nz, column-major).
struct Sums {
    topo: Arc<TopologyData>,
    sums: Vec<f64>,
    used: u64,
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
        }
    }

    /// Whether there are meters at all.
    pub(super) fn is_empty(&self) -> bool {
        self.folded.is_empty()
    }

    /// Adds z·zᵀ for a step of `entry` in `topo`. The first step in a topology
    /// allocates its sums (as the topology's matrices were allocated when first built).
    pub(super) fn add(&mut self, topo: &Arc<TopologyData>, entry: usize, z: &[f64]) {
        if self.is_empty() {
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
        kernel::add_outer(z, &mut s.sums[entry * nz * nz..(entry + 1) * nz * nz]);
    }

    fn open(&mut self, topo: &Arc<TopologyData>) -> usize {
        if self.sums.len() >= self.limit {
            self.last = None;
            let oldest = (0..self.sums.len())
                .min_by_key(|&k| self.sums[k].used)
                .unwrap_or(0);
            let gone = self.sums.swap_remove(oldest);
            fold(&gone, &mut self.folded);
            self.index.remove(&gone.topo.topology.0);
            if let Some(moved) = self.sums.get(oldest) {
                self.index.insert(moved.topo.topology.0, oldest);
            }
        }
        let entries = topo.ladder().entry_count();
        self.sums.push(Sums {
            topo: Arc::clone(topo),
            sums: vec![0.0; entries * self.nz * self.nz],
            used: self.clock,
        });
        let k = self.sums.len() - 1;
        self.index.insert(topo.topology.0, k);
        k
    }

    /// Every meter's integral so far.
    pub(super) fn totals(&self) -> Vec<f64> {
        let mut out = self.folded.clone();
        for s in &self.sums {
            fold(s, &mut out);
        }
        out
    }
}

/// Adds every meter's integral over the steps summed in `s` to `out`.
fn fold(s: &Sums, out: &mut [f64]) {
    s.topo.add_meters(&s.sums, out);
}
