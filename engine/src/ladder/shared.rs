//! The process-wide table of ladders, shared between runs and cases.
//!
//! A ladder is a pure function of its inputs (M, the event rows, the dynamic-state
//! count, the grid and the radix), so two topologies whose inputs are equal bit for bit
//! get the very same matrices whether they are built here or found: a study whose cases
//! differ in source values only (input voltage) builds each topology once, and no
//! result depends on which case built it, on thread count or on case order. Lookups
//! compare every input bit for bit (a hash only picks the bucket). The table keeps at
//! most [`BUDGET`] bytes of ladders; the least recently used goes first. A ladder in use
//! by a run stays alive with that run whatever the table drops.

use std::collections::HashMap;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, LazyLock, Mutex, OnceLock};

use nalgebra::DMatrix;

use super::{Ladder, TimeGrid};

/// Bytes of ladder matrices kept: rungs and the entries formed so far, counted when
/// a ladder is added (entries are formed as steps first read them, so a ladder grows
/// after it is added; the next addition makes room). About 20 topologies of 16 states
/// with 12 event rows on the radix-64 table, a start-up case's worth and more: enough
/// for neighbouring cases that share topologies (a study whose cases differ in source
/// values only); kept small because memory the process has not touched before costs
/// more to fault in and zero than the lazily built rungs a lost entry costs to form
/// again (a 48-case corners study ran about 10 % faster at 8 MB than at 64 MB,
/// measured side by side).
const BUDGET: usize = 8 << 20;

/// What a ladder is built from, compared bit for bit.
struct Inputs {
    m: DMatrix<f64>,
    events: DMatrix<f64>,
    nx: usize,
    grid: TimeGrid,
    bits: u32,
}

impl Inputs {
    fn same(
        &self,
        m: &DMatrix<f64>,
        events: &DMatrix<f64>,
        nx: usize,
        grid: &TimeGrid,
        bits: u32,
    ) -> bool {
        let eq = |a: &DMatrix<f64>, b: &DMatrix<f64>| {
            a.shape() == b.shape()
                && a.iter()
                    .zip(b.iter())
                    .all(|(x, y)| x.to_bits() == y.to_bits())
        };
        self.nx == nx
            && self.bits == bits
            && self.grid.levels == grid.levels
            && self.grid.quantum.to_bits() == grid.quantum.to_bits()
            && eq(&self.m, m)
            && eq(&self.events, events)
    }
}

struct Entry {
    inputs: Inputs,
    ladder: OnceLock<Arc<Ladder>>,
    /// Table clock at the last lookup (written under the table's lock).
    used: AtomicU64,
}

impl Entry {
    /// Bytes held now: the inputs kept for comparison and the ladder, once built.
    fn bytes(&self) -> usize {
        let inputs = (self.inputs.m.len() + self.inputs.events.len()) * std::mem::size_of::<f64>();
        inputs + self.ladder.get().map_or(0, |l| l.bytes())
    }
}

#[derive(Default)]
struct Table {
    buckets: HashMap<u64, Vec<Arc<Entry>>>,
    clock: u64,
}

impl Table {
    fn bytes(&self) -> usize {
        self.buckets.values().flatten().map(|e| e.bytes()).sum()
    }
}

static TABLE: LazyLock<Mutex<Table>> = LazyLock::new(|| Mutex::new(Table::default()));

/// The ladder of these inputs (see [`Ladder::build`]), from the table or built now. A
/// ladder being built by another thread is waited for, not built twice.
pub(crate) fn shared_ladder(
    m: &DMatrix<f64>,
    nx: usize,
    grid: &TimeGrid,
    events: &DMatrix<f64>,
    bits: u32,
) -> Arc<Ladder> {
    let entry = find_or_insert(m, nx, grid, events, bits);
    // Built outside the table's lock: other topologies are found or built meanwhile.
    let ladder = entry
        .ladder
        .get_or_init(|| Arc::new(Ladder::build(m, nx, grid, events, bits)));
    Arc::clone(ladder)
}

fn find_or_insert(
    m: &DMatrix<f64>,
    nx: usize,
    grid: &TimeGrid,
    events: &DMatrix<f64>,
    bits: u32,
) -> Arc<Entry> {
    let hash = fingerprint(m, events, nx, grid, bits);
    let mut table = TABLE.lock().unwrap_or_else(|e| e.into_inner());
    table.clock += 1;
    let clock = table.clock;
    if let Some(bucket) = table.buckets.get(&hash) {
        for entry in bucket {
            if entry.inputs.same(m, events, nx, grid, bits) {
                entry.used.store(clock, Ordering::Relaxed);
                return Arc::clone(entry);
            }
        }
    }
    while table.bytes() > BUDGET && evict_oldest(&mut table) {}
    let entry = Arc::new(Entry {
        inputs: Inputs {
            m: m.clone(),
            events: events.clone(),
            nx,
            grid: *grid,
            bits,
        },
        ladder: OnceLock::new(),
        used: AtomicU64::new(clock),
    });
    table
        .buckets
        .entry(hash)
        .or_default()
        .push(Arc::clone(&entry));
    entry
}

/// Drops the least recently used entry; false when the table is empty.
fn evict_oldest(table: &mut Table) -> bool {
    let mut oldest: Option<(u64, usize, u64)> = None;
    for (&hash, bucket) in &table.buckets {
        for (k, entry) in bucket.iter().enumerate() {
            let used = entry.used.load(Ordering::Relaxed);
            if oldest.is_none_or(|(_, _, u)| used < u) {
                oldest = Some((hash, k, used));
            }
        }
    }
    let Some((hash, k, _)) = oldest else {
        return false;
    };
    if let Some(bucket) = table.buckets.get_mut(&hash) {
        bucket.swap_remove(k);
        if bucket.is_empty() {
            table.buckets.remove(&hash);
        }
    }
    true
}

/// Empties the process-wide table of propagator ladders, so the next run builds every
/// topology it visits afresh: for benchmarks that measure a cold start. Results never
/// depend on it (a ladder found is bit-equal to one built).
pub fn clear_shared_ladders() {
    let mut table = TABLE.lock().unwrap_or_else(|e| e.into_inner());
    table.buckets.clear();
}

/// 64-bit FNV-1a over every input's bits: picks the bucket; equality decides.
fn fingerprint(
    m: &DMatrix<f64>,
    events: &DMatrix<f64>,
    nx: usize,
    grid: &TimeGrid,
    bits: u32,
) -> u64 {
    let head = [
        nx as u64,
        u64::from(bits),
        u64::from(grid.levels),
        grid.quantum.to_bits(),
    ];
    let words = head
        .into_iter()
        .chain([m.nrows() as u64, events.nrows() as u64])
        .chain(m.iter().chain(events.iter()).map(|v| v.to_bits()));
    words.fold(0xcbf2_9ce4_8422_2325_u64, |h, w| {
        (h ^ w).wrapping_mul(0x0000_0100_0000_01b3)
    })
}
