//! The traced probes' rows of each topology, gathered into two small blocks (values
//! and slopes) stored four rows at a time, so a trace point reads them in one pass over
//! z, four rows to a register, instead of one dot product per row, each with its own
//! horizontal sum.
//!
//! The blocks give the same bits as [`TopologyData::value_at`] and
//! [`TopologyData::slope`] row by row (`kernel::dots_block`), so a probe's value, and
//! the slope its extremum is bisected on, do not depend on how its rows are read. A
//! topology's blocks are gathered the first time a trace point falls in it (the same
//! moment its matrices are built) and kept until the traced probes change.

use crate::kernel;
use crate::system::TopologyData;
use crate::topology::Topology;

/// One topology's traced rows, the traced probes in list order (see
/// `kernel::dots_block` for the layout).
struct Block {
    topology: Topology,
    values: Vec<f64>,
    slopes: Vec<f64>,
}

/// The traced rows of the topologies met so far, and room for one point's values and
/// slopes.
pub(super) struct ProbeRows {
    blocks: Vec<Block>,
    /// The block used last: consecutive points mostly fall in one topology.
    last: usize,
    out: Vec<f64>,
}

impl ProbeRows {
    pub(super) fn new() -> Self {
        ProbeRows {
            blocks: Vec::new(),
            last: 0,
            out: Vec::new(),
        }
    }

    /// Forgets every block (the traced probes changed); `traced` of them from now.
    pub(super) fn reset(&mut self, traced: usize) {
        self.blocks.clear();
        self.last = 0;
        self.out = vec![0.0; 2 * traced];
    }

    /// `values[k]` and `slopes[k]` = probe k's value and its time derivative (per
    /// second) at state `z` in `topo`, for each k in `list` (probe k is row
    /// `first + k`).
    pub(super) fn read(
        &mut self,
        topo: &TopologyData,
        first: usize,
        list: &[usize],
        z: &[f64],
        values: &mut [f64],
        slopes: &mut [f64],
    ) {
        let b = self.block(topo, first, list);
        let block = &self.blocks[b];
        let half = self.out.len() / 2;
        let (v, s) = self.out.split_at_mut(half);
        let (v, s) = (&mut v[..list.len()], &mut s[..list.len()]);
        kernel::dots_block(&block.values, z, v);
        kernel::pair_dots_block(&block.slopes, z, s);
        for ((&k, &vk), &sk) in list.iter().zip(v.iter()).zip(s.iter()) {
            values[k] = vk;
            slopes[k] = sk;
        }
    }

    /// Index of `topo`'s block, gathered now if it has none.
    fn block(&mut self, topo: &TopologyData, first: usize, list: &[usize]) -> usize {
        let t = topo.topology;
        if self.blocks.get(self.last).is_some_and(|b| b.topology == t) {
            return self.last;
        }
        self.last = match self.blocks.iter().position(|b| b.topology == t) {
            Some(b) => b,
            None => {
                let rows: Vec<usize> = list.iter().map(|&k| first + k).collect();
                self.blocks.push(Block {
                    topology: t,
                    values: topo.gather_rows(&rows),
                    slopes: topo.gather_slopes(&rows),
                });
                self.blocks.len() - 1
            }
        };
        self.last
    }
}
