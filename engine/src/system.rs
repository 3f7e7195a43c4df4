//! The immutable problem: a checked circuit, what is observed, the time grid, and the
//! lazily built, bounded cache of per-topology matrices.

use std::collections::HashMap;
use std::sync::{Arc, OnceLock};

use nalgebra::DMatrix;

use crate::check::check_structure;
use crate::circuit::{Circuit, ElementKind, Signal};
use crate::error::EngineError;
use crate::kernel;
use crate::ladder::{quadratic_form, shared_ladder, step_gramian, Ladder, TimeGrid};
use crate::layout::Layout;
use crate::nodal::Nodal;
use crate::topology::Topology;
use crate::validate::validate;

/// A quadratic integral ∫ Σ c·a(t)·b(t) dt, integrated exactly (an energy, a loss).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Meter {
    /// Label for reports.
    pub name: String,
    /// (coefficient, a, b) products, summed.
    pub terms: Vec<(f64, Signal, Signal)>,
}

/// What a run observes: output probes, signals that events are defined on, meters.
#[derive(Clone, Debug, Default)]
pub struct Observation {
    /// Named output quantities, sampled into the sink in this order.
    pub probes: Vec<(String, Signal)>,
    /// Signals that [`crate::EventFn`]s refer to by index.
    pub event_signals: Vec<Signal>,
    /// Quadratic integrals.
    pub meters: Vec<Meter>,
}

/// Matrices of one topology.
pub struct TopologyData {
    /// The topology.
    pub topology: Topology,
    /// Augmented state matrix: ż = M z.
    pub m: DMatrix<f64>,
    /// Exact propagators with the event rows carried along (an event function one
    /// step ahead of z is one dot product, which is what bisection mostly needs):
    /// found or built when a step first needs them ([`TopologyData::ladder`]), so a
    /// topology only passed through while the diodes settle costs a nodal analysis,
    /// never exponentials, and shared with every run whose inputs are bit-equal.
    ladder: OnceLock<Arc<Ladder>>,
    /// What the ladder is built from.
    recipe: LadderRecipe,
    /// Rows over z, stored as columns so each is contiguous: diode switching
    /// functions (one per diode), then event signals, then probes.
    pub rows_t: DMatrix<f64>,
    /// Time derivatives of the same rows in this topology (row·M), stacked in the
    /// same order, column-major: the slope of a quantity is one more row over z,
    /// exact like the quantity itself. Stored row-stacked so the event functions'
    /// slopes at a state are one matrix–vector product.
    pub slopes: DMatrix<f64>,
    /// [`TopologyData::slopes`] transposed, so one row's slope (a traced probe's, at
    /// every step end) reads contiguous memory.
    slopes_t: DMatrix<f64>,
}

/// One term of a meter: c·a·b with a and b rows over z.
type MeterTerm = (f64, nalgebra::RowDVector<f64>, nalgebra::RowDVector<f64>);

/// The inputs of a topology's [`Ladder`] besides M.
struct LadderRecipe {
    nx: usize,
    grid: TimeGrid,
    /// Event rows (diode functions, then event signals) over z.
    events: DMatrix<f64>,
    /// Each meter's terms as (coefficient, row of a, row of b) over z.
    meter_terms: Vec<Vec<MeterTerm>>,
    /// Quadratic forms of the meters, formed from their terms when a meter is first
    /// read in this topology (most topologies a run passes through never are).
    forms: OnceLock<Vec<DMatrix<f64>>>,
    bits: u32,
}

impl TopologyData {
    /// The propagator ladder, built on first use (the same matrices whenever that is).
    pub(crate) fn ladder(&self) -> &Ladder {
        self.ladder.get_or_init(|| {
            let r = &self.recipe;
            shared_ladder(&self.m, r.nx, &r.grid, &r.events, r.bits)
        })
    }

    /// Each meter's integral over the steps whose Σ z·zᵀ per table entry are `sums(e)`
    /// (an nz × nz block, `None` for an entry no step took), added to `totals`:
    /// tr(Q_k·L) with L the meter-independent integral of [`step_gramian`].
    pub(crate) fn add_meters<'a>(
        &self,
        sums: impl Fn(usize) -> Option<&'a [f64]>,
        totals: &mut [f64],
    ) {
        let r = &self.recipe;
        let l = step_gramian(self.ladder(), &self.m, &r.grid, sums);
        let nz = self.m.nrows();
        let forms = (r.forms).get_or_init(|| {
            let form = |terms: &Vec<MeterTerm>| quadratic_form(nz, terms);
            r.meter_terms.iter().map(form).collect()
        });
        for (total, q) in totals.iter_mut().zip(forms) {
            *total += kernel::dot(q.as_slice(), l.as_slice());
        }
    }

    /// Rows of a ladder entry's output (see [`Ladder::rows`]), known without building.
    pub(crate) fn ladder_rows(&self) -> usize {
        (self.m.nrows() + self.recipe.events.nrows()).div_ceil(4) * 4
    }

    /// Event rows in a ladder entry (see [`Ladder::n_events`]).
    pub(crate) fn event_rows(&self) -> usize {
        self.recipe.events.nrows()
    }

    /// Value of row `r` (see [`TopologyData::rows_t`]) at state `z`.
    #[inline]
    pub fn value(&self, r: usize, z: &nalgebra::DVector<f64>) -> f64 {
        self.value_at(r, z.as_slice())
    }

    /// Value of row `r` at a state given as a slice (a state read inside a step).
    #[inline]
    pub fn value_at(&self, r: usize, z: &[f64]) -> f64 {
        let n = self.rows_t.nrows();
        kernel::dot(&self.rows_t.as_slice()[r * n..(r + 1) * n], z)
    }

    /// Time derivative of row `r` at state `z`, per second.
    #[inline]
    pub fn slope(&self, r: usize, z: &[f64]) -> f64 {
        let n = self.slopes_t.nrows();
        kernel::pair_dot(&self.slopes_t.as_slice()[r * n..(r + 1) * n], z)
    }

    /// Rows `rows` (see [`TopologyData::rows_t`]) gathered four rows at a time
    /// for `kernel::dots_block`.
    pub(crate) fn gather_rows(&self, rows: &[usize]) -> Vec<f64> {
        gather(&self.rows_t, rows)
    }

    /// The slopes of rows `rows`, gathered as [`TopologyData::gather_rows`] gathers
    /// their values.
    pub(crate) fn gather_slopes(&self, rows: &[usize]) -> Vec<f64> {
        gather(&self.slopes_t, rows)
    }

    /// Slopes of the first `out.len()` rows at state `z`, per second.
    #[inline]
    pub fn slopes_into(&self, z: &[f64], out: &mut [f64]) {
        kernel::matvec_rows(self.slopes.as_slice(), self.slopes.nrows(), z, out);
    }

    /// Number of rows.
    pub fn row_count(&self) -> usize {
        self.rows_t.ncols()
    }
}

/// Columns `rows` of `t` (each a row over z, stored contiguously) as the rows of a
/// `kernel::rows_block`.
fn gather(t: &DMatrix<f64>, rows: &[usize]) -> Vec<f64> {
    let nz = t.nrows();
    let columns = rows.iter().map(|&r| &t.as_slice()[r * nz..(r + 1) * nz]);
    kernel::rows_block(columns, nz)
}

/// Bits per digit of the step table: radix 64. A step or an event search costs one
/// product per digit of its length in ticks, so fewer, wider digits mean fewer
/// products (a 21-level grid has 4 digits on this table against 6 on radix 16), for
/// more entries that may be formed (63 per digit; each is formed only when a step
/// first reads it). The shipped corners study: 63 steps per period on binary rungs, 40
/// on radix 16 (callgrind, one case); on radix 64 the whole study takes about 6 %
/// fewer instructions (callgrind) and 4 % less time than on radix 16, and radix 32 and
/// 256 take 3 % and 8 % more time than 64 (whole study, alternated). Runs with meters
/// use it too: a meter costs one z·zᵀ sum per entry used (`sim/meters.rs`).
const RADIX_BITS: u32 = 6;

/// Hashes a topology mask with one multiplication: the keys are our own bit masks, not
/// adversarial input, and the lookup runs at every switching instant.
#[derive(Clone, Copy, Default)]
struct BuildMaskHasher;

/// See [`BuildMaskHasher`].
#[derive(Default)]
struct MaskHasher(u64);

impl std::hash::BuildHasher for BuildMaskHasher {
    type Hasher = MaskHasher;
    fn build_hasher(&self) -> MaskHasher {
        MaskHasher(0)
    }
}

impl std::hash::Hasher for MaskHasher {
    fn finish(&self) -> u64 {
        // Fold the high half of the 128-bit product in, so every key bit reaches the
        // low bits (bucket) and the high bits (tag) of the hash.
        let p = u128::from(self.0) * 0x9E37_79B9_7F4A_7C15;
        (p as u64) ^ ((p >> 64) as u64)
    }
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.0 = self.0.rotate_left(8) ^ u64::from(b);
        }
    }
    fn write_u64(&mut self, x: u64) {
        self.0 ^= x;
    }
}

/// A circuit ready to simulate.
pub struct System {
    pub(crate) circuit: Circuit,
    pub(crate) layout: Layout,
    pub(crate) grid: TimeGrid,
    pub(crate) observation: Observation,
    cache: HashMap<u64, (Arc<TopologyData>, u64), BuildMaskHasher>,
    cache_limit: usize,
    clock: u64,
}

impl System {
    /// Checks the circuit and prepares the problem. No topology is built yet.
    pub fn new(
        circuit: Circuit,
        observation: Observation,
        grid: TimeGrid,
        cache_limit: usize,
    ) -> Result<Self, EngineError> {
        validate(&circuit)?;
        check_structure(&circuit)?;
        let layout = Layout::new(&circuit)?;
        Ok(System {
            circuit,
            layout,
            grid,
            observation,
            cache: HashMap::default(),
            cache_limit: cache_limit.max(2),
            clock: 0,
        })
    }

    /// The circuit.
    pub fn circuit(&self) -> &Circuit {
        &self.circuit
    }

    /// The state layout.
    pub fn layout(&self) -> &Layout {
        &self.layout
    }

    /// The time grid.
    pub fn grid(&self) -> &TimeGrid {
        &self.grid
    }

    /// What is observed.
    pub fn observation(&self) -> &Observation {
        &self.observation
    }

    /// Number of diode rows at the top of [`TopologyData::rows`].
    pub fn diode_count(&self) -> usize {
        self.layout.diode_bits.len()
    }

    /// Matrices of a topology, from the cache or built now.
    pub fn topology(&mut self, t: Topology) -> Result<Arc<TopologyData>, EngineError> {
        self.clock += 1;
        if let Some(entry) = self.cache.get_mut(&t.0) {
            entry.1 = self.clock;
            return Ok(entry.0.clone());
        }
        let data = Arc::new(self.build(t)?);
        if self.cache.len() >= self.cache_limit {
            // Least recently used goes; a scan is fine, eviction is rare.
            if let Some(&oldest) = self
                .cache
                .iter()
                .min_by_key(|(_, (_, used))| *used)
                .map(|(k, _)| k)
            {
                self.cache.remove(&oldest);
            }
        }
        self.cache.insert(t.0, (data.clone(), self.clock));
        Ok(data)
    }

    /// Nodal analysis of a topology (for callers that want rows of their own).
    pub fn nodal(&self, t: Topology) -> Result<Nodal<'_>, EngineError> {
        Nodal::solve(&self.circuit, &self.layout, t)
    }

    fn build(&self, t: Topology) -> Result<TopologyData, EngineError> {
        let nodal = self.nodal(t)?;
        let m = nodal.state_matrix()?;
        let nz = self.layout.nz();
        let obs = &self.observation;
        let n_rows = self.diode_count() + obs.event_signals.len() + obs.probes.len();
        let mut rows = DMatrix::<f64>::zeros(n_rows, nz);
        for (r, &bit) in self.layout.diode_bits.iter().enumerate() {
            rows.set_row(r, &self.diode_function(&nodal, t, bit)?);
        }
        let signals = obs
            .event_signals
            .iter()
            .chain(obs.probes.iter().map(|(_, s)| s));
        for (r, s) in signals.enumerate() {
            rows.set_row(self.diode_count() + r, &nodal.signal(s)?);
        }
        let mut meter_terms = Vec::with_capacity(obs.meters.len());
        for meter in &obs.meters {
            let mut terms = Vec::with_capacity(meter.terms.len());
            for (c, a, b) in &meter.terms {
                terms.push((*c, nodal.signal(a)?, nodal.signal(b)?));
            }
            meter_terms.push(terms);
        }
        let n_events = self.diode_count() + obs.event_signals.len();
        let events = rows.rows(0, n_events).into_owned();
        let bits = RADIX_BITS;
        let rows_t = rows.transpose();
        let slopes = &rows * &m;
        Ok(TopologyData {
            topology: t,
            slopes_t: slopes.transpose(),
            slopes,
            m,
            ladder: OnceLock::new(),
            recipe: LadderRecipe {
                nx: self.layout.nx(),
                grid: self.grid,
                events,
                meter_terms,
                forms: OnceLock::new(),
                bits,
            },
            rows_t,
        })
    }

    /// Switching functions of every diode in topology `t` at state `z` (positive: the
    /// diode wants to change state), from a nodal solve alone.
    pub fn diode_functions(
        &self,
        t: Topology,
        z: &nalgebra::DVector<f64>,
    ) -> Result<Vec<f64>, EngineError> {
        let nodal = self.nodal(t)?;
        self.layout
            .diode_bits
            .iter()
            .map(|&bit| Ok(self.diode_function(&nodal, t, bit)?.transpose().dot(z)))
            .collect()
    }

    /// Switching function of a diode: positive means it wants to change state.
    /// Conducting: −i (current falls through zero). Blocking: v − vf (voltage rises
    /// through the threshold).
    fn diode_function(
        &self,
        nodal: &Nodal<'_>,
        t: Topology,
        bit: usize,
    ) -> Result<nalgebra::RowDVector<f64>, EngineError> {
        let id = self.layout.switchable[bit];
        let ElementKind::Diode { params } = self.circuit.elements[id.0].kind else {
            unreachable!("diode_bits index diodes only");
        };
        use crate::circuit::Quantity;
        Ok(if t.is_on(bit) {
            -nodal.quantity(Quantity::Current(id))?
        } else {
            nodal.quantity(Quantity::Voltage(id))? - nodal.quantity(Quantity::One)? * params.vf
        })
    }
}
