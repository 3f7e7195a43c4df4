//! Carrying ∂x/∂x₀ along a run: the sensitivity of the dynamic states to the states
//! last set (the monodromy matrix when the run spans one period of a periodic drive).
//!
//! Between switching instants the state moves by the propagator of each step,
//! x ← Φ_xx·x + (sources' part), so the sensitivity moves by S ← Φ_xx·S, the state part
//! of the same cached entry (Aprille & Trick, "Steady-state analysis of nonlinear
//! circuits with periodic inputs", Proc. IEEE 60(1), 1972, §III). At a switching
//! instant t_s the vector field jumps from f⁻ to f⁺ while x stays continuous; if t_s
//! moves with the state, a perturbed trajectory spends −δt_s longer in f⁺, so
//! δx⁺ = δx⁻ − (f⁺ − f⁻)·δt_s. With S the sensitivity just before and τ = ∂t_s/∂x₀
//! (a row), S ← S − (f⁺ − f⁻)·τ. For an instant set by an event function g crossing
//! zero, g(x(t_s), t_s) = 0 gives τ = −∇gᵀ·S / (∇g·f⁻ + ∂g/∂t), which makes the update
//! the saltation matrix (I + (f⁺ − f⁻)·∇gᵀ / (∇g·f⁻ + ∂g/∂t))·S (Leine & Nijmeijer,
//! "Dynamics and Bifurcations of Non-smooth Mechanical Systems", Springer 2004, §3.5;
//! Müller, "Calculation of Lyapunov exponents for dynamic systems with
//! discontinuities", Chaos, Solitons & Fractals 5(9), 1995).
//!
//! What the engine does with that:
//! - **Event instants.** When an event is located, τ is formed from the function that
//!   crossed (its row over the state, ∇g, and its slope in the old topology, including
//!   an armed event's rate ∂g/∂t) and f⁻ from the old topology; f⁺ is read when the
//!   next step starts, after the diodes have settled and the driver has changed what it
//!   changes at that instant. So a settling cascade (one diode's change makes the next
//!   one's switching function positive at the same instant) is one update from the
//!   first field to the last, which equals the product of the stagewise saltations in
//!   order, each with the crossing function's gradient and its own stage's field before
//!   (the algebra: (I + b·vᵀ)(I + a·uᵀ) = I + (a + b)·uᵀ for u = ∇g/(∇g·f₀),
//!   v = ∇g/(∇g·f₁), a = f₁ − f₀, b = f₂ − f₁).
//! - **Scheduled instants** (a clock edge, a source breakpoint, any change a driver
//!   makes at a time of its own) do not move with the state: τ = 0, no update.
//! - **Delayed instants.** A driver that acts a fixed delay after an event (a gate
//!   delay after a comparator trips) says so ([`super::Simulation::delay_from`] with
//!   the event's [`EventStamp`]): the instant has that event's τ, and f⁻ is the field
//!   when it says so.
//!
//! Events are located to one tick, so the jump is applied up to one tick late: an
//! error of order (tick)·‖M‖ in S, far below anything a Newton step notices.

use nalgebra::DMatrix;

use crate::kernel;

/// Identifies one located crossing of an armed event, so a driver acting a fixed delay
/// after it can tie that instant to it ([`super::Simulation::delay_from`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct EventStamp(u64);

/// Timings of the latest armed crossings kept for delayed instants: a driver acts on
/// the one that stopped it, possibly after a few others fired during its delay.
const KEPT: usize = 4;

/// The sensitivity and what it needs at switching instants. Sized when tracking starts:
/// nothing here allocates while stepping.
pub(super) struct Sensitivity {
    nx: usize,
    /// ∂x/∂x₀, nx × nx.
    s: DMatrix<f64>,
    /// Work space for the product of a step.
    next: DMatrix<f64>,
    /// ∂t/∂x₀ of the present instant and the field before it, when the instant moves
    /// with the state and the update waits for the field after.
    pending: Option<Option<u64>>,
    timing: Vec<f64>,
    before: Vec<f64>,
    after: Vec<f64>,
    /// (stamp, ∂t/∂x₀) of the latest armed crossings, oldest overwritten first.
    armed: [(u64, Vec<f64>); KEPT],
    stamps: u64,
    /// Set when an instant could not be accounted for (two different timings at one
    /// instant, a stamp no longer kept, a grazing crossing).
    lost: bool,
}

impl Sensitivity {
    pub(super) fn new(nx: usize) -> Self {
        Sensitivity {
            nx,
            s: DMatrix::identity(nx, nx),
            next: DMatrix::zeros(nx, nx),
            pending: None,
            timing: vec![0.0; nx],
            before: vec![0.0; nx],
            after: vec![0.0; nx],
            armed: std::array::from_fn(|_| (0, vec![0.0; nx])),
            stamps: 0,
            lost: false,
        }
    }

    /// Starts again from S = I (the states were just set).
    pub(super) fn reset(&mut self) {
        self.s.fill_with_identity();
        self.pending = None;
        self.armed.iter_mut().for_each(|a| a.0 = 0);
        self.lost = false;
    }

    /// ∂x/∂x₀ with the present instant's update applied, if everything was accounted.
    pub(super) fn matrix(&mut self, m: &DMatrix<f64>, z: &[f64]) -> Option<&DMatrix<f64>> {
        self.settle_instant(m, z);
        (!self.lost && kernel::all_finite(self.s.as_slice())).then_some(&self.s)
    }

    /// S ← Φ_xx·S for the entry `stacked` (rows × nz, the state rows first) of a step
    /// about to be taken; [`Sensitivity::commit`] makes it S once the step is.
    pub(super) fn propose(&mut self, stacked: &DMatrix<f64>, rows: usize) {
        let nx = self.nx;
        let a = kernel::Operand {
            a: stacked.as_slice(),
            lda: rows,
            rows: nx,
            inner: nx,
        };
        let cols = self.s.ncols();
        kernel::product(a, self.s.as_slice(), nx, cols, self.next.as_mut_slice(), nx);
    }

    pub(super) fn commit(&mut self) {
        std::mem::swap(&mut self.s, &mut self.next);
    }

    /// A step starts from `z` in the topology of state matrix `m`: the update of the
    /// instant it starts at, if one waits, with the field there as f⁺.
    pub(super) fn settle_instant(&mut self, m: &DMatrix<f64>, z: &[f64]) {
        if self.pending.take().is_none() {
            return;
        }
        field(m, self.nx, z, &mut self.after);
        let nx = self.nx;
        for (column, &tj) in self.s.as_mut_slice().chunks_exact_mut(nx).zip(&self.timing) {
            for ((sij, fa), fb) in column.iter_mut().zip(&self.after).zip(&self.before) {
                *sij -= (fa - fb) * tj;
            }
        }
    }

    /// An event function with gradient `grad` (over z; its first nx entries are ∇g)
    /// and time derivative `slope` (in the old topology, with ∂g/∂t) crossed at state
    /// `z` in the topology of `m`; `armed` when it is an armed event, whose stamp is
    /// returned.
    pub(super) fn event(
        &mut self,
        grad: &[f64],
        slope: f64,
        m: &DMatrix<f64>,
        z: &[f64],
        armed: bool,
    ) -> Option<EventStamp> {
        let nx = self.nx;
        if self.pending.is_some() {
            // A second crossing at an instant already timed by another (it can only
            // happen within one tick of the first): its own timing cannot be told
            // apart.
            self.lost = true;
        }
        for (tj, column) in self
            .timing
            .iter_mut()
            .zip(self.s.as_slice().chunks_exact(nx))
        {
            *tj = -kernel::dot(&grad[..nx], column) / slope;
        }
        self.lost |= !kernel::all_finite(&self.timing);
        field(m, nx, z, &mut self.before);
        if !armed {
            self.pending = Some(None);
            return None;
        }
        self.stamps += 1;
        let oldest = (0..KEPT).min_by_key(|&k| self.armed[k].0).unwrap_or(0);
        self.armed[oldest].0 = self.stamps;
        self.armed[oldest].1.copy_from_slice(&self.timing);
        self.pending = Some(Some(self.stamps));
        Some(EventStamp(self.stamps))
    }

    /// The present instant is a fixed delay after the crossing `stamp`: changes made
    /// from now on at this instant move with it; the field now is f⁻.
    pub(super) fn delay_from(&mut self, stamp: EventStamp, m: &DMatrix<f64>, z: &[f64]) {
        match self.pending {
            // The crossing's own instant (no delay): already timed by it.
            Some(Some(s)) if s == stamp.0 => return,
            Some(_) => {
                self.lost = true;
                return;
            }
            None => {}
        }
        let Some(k) = (0..KEPT).find(|&k| self.armed[k].0 == stamp.0 && stamp.0 != 0) else {
            self.lost = true;
            return;
        };
        self.timing.copy_from_slice(&self.armed[k].1);
        field(m, self.nx, z, &mut self.before);
        self.pending = Some(Some(stamp.0));
    }
}

/// f = the state rows of M·z (the dynamic states' time derivatives).
fn field(m: &DMatrix<f64>, nx: usize, z: &[f64], out: &mut [f64]) {
    kernel::matvec_rows(m.as_slice(), m.nrows(), z, &mut out[..nx]);
}

impl super::Simulation {
    /// Starts (`true`) or stops carrying ∂x/∂x₀ along the run, x₀ the dynamic states
    /// as they are now; setting states ([`super::Simulation::set_states`], a take-over)
    /// starts it again from the identity. Off (the default), stepping does no work for
    /// it; on, each step costs one nx × nx product more.
    pub fn track_sensitivity(&mut self, on: bool) {
        self.last_stamp = None;
        self.sens = on.then(|| {
            let nx = self.run.system.layout.nx();
            match self.sens.take() {
                Some(mut s) if s.nx == nx => {
                    s.reset();
                    s
                }
                _ => Sensitivity::new(nx),
            }
        });
    }

    /// ∂x/∂x₀ now (nx × nx, see [`super::Simulation::track_sensitivity`]), including
    /// what changed at the present instant; `None` when not tracked, or when an instant
    /// could not be accounted for (two crossings within one tick, a delayed instant
    /// whose event is no longer known, a crossing with zero slope).
    pub fn sensitivity(&mut self) -> Option<&nalgebra::DMatrix<f64>> {
        let (topo, z) = (&self.run.topo, self.run.z.as_slice());
        self.sens.as_mut()?.matrix(&topo.m, z)
    }

    /// The latest crossing of an armed event while sensitivities are tracked (the one
    /// an [`crate::Stop::Armed`] just reported).
    pub fn last_event_stamp(&self) -> Option<EventStamp> {
        self.last_stamp
    }

    /// Says the present instant comes a fixed delay after the crossing `stamp`, so
    /// what the driver changes now moves with that crossing's instant; call it before
    /// making the changes. Without it an instant a driver acts at is taken as
    /// scheduled (a clock edge), which does not move with the state. A no-op when
    /// sensitivities are not tracked.
    pub fn delay_from(&mut self, stamp: EventStamp) {
        let (topo, z) = (&self.run.topo, self.run.z.as_slice());
        if let Some(s) = self.sens.as_mut() {
            s.delay_from(stamp, &topo.m, z);
        }
    }

    /// The states were just set: ∂x/∂x₀ starts again from the identity.
    pub(super) fn restart_sensitivity(&mut self) {
        self.last_stamp = None;
        if let Some(s) = self.sens.as_mut() {
            s.reset();
        }
    }

    /// A step from the present state is starting: the present instant's update, if one
    /// waits.
    #[inline]
    pub(super) fn sensitivity_step_starts(&mut self) {
        if let Some(s) = self.sens.as_mut() {
            s.settle_instant(&self.run.topo.m, self.run.z.as_slice());
        }
    }

    /// The step of table entry `stacked` (rows × nz) is being taken.
    #[inline]
    pub(super) fn sensitivity_moves(
        sens: &mut Option<Sensitivity>,
        stacked: &DMatrix<f64>,
        rows: usize,
    ) {
        if let Some(s) = sens.as_mut() {
            s.propose(stacked, rows);
            s.commit();
        }
    }

    /// Functions `crossed` (bits as in the stepping loop: diodes, then armed slots)
    /// have just been located at the present state, in the topology they crossed in.
    pub(super) fn sensitivity_event(&mut self, crossed: u128) {
        let Some(s) = self.sens.as_mut() else { return };
        if crossed == 0 {
            return;
        }
        let nd = self.run.system.diode_count();
        let (topo, z) = (&*self.run.topo, self.run.z.as_slice());
        // An armed crossing first: a driver may act on it after a delay, and the stamp
        // it reads must be this crossing's.
        let armed_bits = crossed >> nd;
        let (row, rate, armed) = if armed_bits != 0 {
            let k = armed_bits.trailing_zeros() as usize;
            match &self.armed[k] {
                Some(a) => (a.row, a.f.rate, true),
                None => return,
            }
        } else {
            (crossed.trailing_zeros() as usize, 0.0, false)
        };
        let n = topo.rows_t.nrows();
        let grad = &topo.rows_t.as_slice()[row * n..(row + 1) * n];
        let slope = topo.slope(row, z) + rate;
        let stamp = s.event(grad, slope, &topo.m, z, armed);
        if armed {
            self.last_stamp = stamp;
        }
    }
}
