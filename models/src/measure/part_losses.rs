//! Losses the piecewise-linear circuit does not simulate, figured per part from the
//! trace of the exact solution and the cycle records (never from output samples, so
//! no figure depends on the sample interval): the main switch's transition loss, its
//! gate-drive loss and the core loss. Each is optional per part
//! ([`crate::components::Switch::transitions`], [`crate::components::Switch::gate_drive`],
//! [`crate::components::Transformer::core_loss`]).
//!
//! - **Transition loss.** The simulated switch changes state in one tick; a real one
//!   takes t_r to turn on and t_f to turn off, with voltage and current overlapping. By
//!   the linear-ramp estimate of common practice each transition dissipates ½·V·I·t,
//!   which is ½·V·I·(t_r + t_f)·f per cycle at equal V and I. Here V and I are the
//!   simulated switch's own: at turn-on, the drain voltage just before it and the
//!   switch current just after it; at turn-off, the switch current just before it and
//!   the highest drain voltage of the off interval that follows (the level the drain
//!   is clamped at while the core resets, the voltage the current is commutated
//!   against; a leakage spike, if the design has one, is included, which errs high).
//!   Or a fixed energy per turn-on and turn-off.
//! - **Gate drive.** Q_g·V_drive per turn-on, P = Q_g·V_drive·f (common practice). The
//!   driver is supplied by the controller's supply, not by the power stage's input, so
//!   this power is counted with the bias power in the whole-converter efficiency.
//! - **Core loss.** Per cycle, P = k·f^α·B̂^β·V_core (Steinmetz 1892,
//!   [`crate::components::CoreLoss`]) with f = 1/T and B̂ = (B_max − B_min)/2 over the
//!   cycle.
//!
//! Energies are summed over the transitions and cycles that start inside the loss
//! report's window, so they divide by the same window length as the metered losses.
//! The power stage's input supplies the transition and core losses too (first order:
//! the simulated currents do not include them), so they are added to the input power.

use stepflux_engine::TracePoint;

use super::{probe_index, Figure, Measurement};
use crate::components::{CoreLoss, GateDrive, Transitions};
use crate::cycles::CycleRecord;
use crate::error::ModelError;
use crate::template::{ForwardDesign, Probe};

/// Energies of the modelled losses over a window, joules.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct PartEnergies {
    /// Main-switch transitions.
    pub transition: f64,
    /// Gate drive.
    pub gate_drive: f64,
    /// Core (Steinmetz).
    pub core: f64,
}

/// A turn-off whose off interval is still being watched for its drain plateau.
#[derive(Clone, Copy, Debug, PartialEq)]
struct OpenTurnOff {
    time: f64,
    current: f64,
    drain_peak: f64,
}

/// Streaming measurement of [`PartEnergies`] over `[from, to)`.
#[derive(Clone, Debug, PartialEq)]
pub struct PartLosses {
    transitions: Option<Transitions>,
    gate: Option<GateDrive>,
    core: Option<CoreLoss>,
    drain: usize,
    current: usize,
    flux: usize,
    bit: Option<usize>,
    from: f64,
    to: f64,
    /// Switch state, drain voltage and current at the previous trace point.
    last: Option<(bool, f64, f64)>,
    off: Option<OpenTurnOff>,
    flux_range: Option<(f64, f64)>,
    sums: PartEnergies,
    turn_ons: usize,
    cycles: usize,
}

impl PartLosses {
    /// The losses of `design`'s main switch and core over `[from, to)` seconds, read
    /// from the probes `drain.v`, `sw.i` and `core.b` of `probes` (they must be traced).
    /// The main switch's topology bit is set with [`PartLosses::watch_switch`].
    pub fn new(
        design: &ForwardDesign,
        probes: &[Probe],
        from: f64,
        to: f64,
    ) -> Result<Self, ModelError> {
        Ok(PartLosses {
            transitions: design.switch.transitions,
            gate: design.switch.gate_drive,
            core: design.transformer.core_loss,
            drain: probe_index(probes, "drain.v")?,
            current: probe_index(probes, "sw.i")?,
            flux: probe_index(probes, "core.b")?,
            bit: None,
            from,
            to,
            last: None,
            off: None,
            flux_range: None,
            sums: PartEnergies::default(),
            turn_ons: 0,
            cycles: 0,
        })
    }

    /// Watches the main switch at topology bit `bit` (the run's layout `bit_of` of the
    /// main switch); until then no transition is seen.
    pub fn watch_switch(&mut self, bit: Option<usize>) {
        self.bit = bit;
    }

    /// Whether the design asks for any modelled loss.
    pub fn any(&self) -> bool {
        self.transitions.is_some() || self.gate.is_some() || self.core.is_some()
    }

    /// Probe positions to trace: drain voltage, switch current, flux density.
    pub fn probes(&self) -> [usize; 3] {
        [self.drain, self.current, self.flux]
    }

    fn inside(&self, t: f64) -> bool {
        t >= self.from && t < self.to
    }

    fn turn_on_energy(&self, v: f64, i: f64) -> f64 {
        match self.transitions {
            Some(Transitions::Times { rise_time, .. }) => 0.5 * v.abs() * i.abs() * rise_time,
            Some(Transitions::Energy { turn_on, .. }) => turn_on,
            None => 0.0,
        }
    }

    fn turn_off_energy(&self, off: &OpenTurnOff) -> f64 {
        match self.transitions {
            Some(Transitions::Times { fall_time, .. }) => {
                0.5 * off.drain_peak.abs() * off.current.abs() * fall_time
            }
            Some(Transitions::Energy { turn_off, .. }) => turn_off,
            None => 0.0,
        }
    }

    /// Energies so far; a turn-off whose off interval is still open counts with the
    /// drain peak seen so far.
    pub fn energies(&self) -> PartEnergies {
        let mut e = self.sums;
        if let Some(off) = self.off.filter(|o| self.inside(o.time)) {
            e.transition += self.turn_off_energy(&off);
        }
        e
    }
}

impl Measurement for PartLosses {
    fn trace(&mut self, point: &TracePoint<'_>) {
        let v = point.values;
        let (drain, current, b) = (v[self.drain], v[self.current], v[self.flux]);
        if b.is_finite() {
            self.flux_range = Some(match self.flux_range {
                Some((lo, hi)) => (lo.min(b), hi.max(b)),
                None => (b, b),
            });
        }
        let Some(bit) = self.bit else {
            return;
        };
        let on = point.topology.is_on(bit);
        if let Some(off) = self.off.as_mut() {
            off.drain_peak = off.drain_peak.max(drain);
        }
        match self.last {
            Some((false, v_before, _)) if on => {
                if let Some(off) = self.off.take().filter(|o| self.inside(o.time)) {
                    self.sums.transition += self.turn_off_energy(&off);
                }
                if self.inside(point.time) {
                    self.sums.transition += self.turn_on_energy(v_before, current);
                    self.sums.gate_drive += self.gate.map_or(0.0, |g| g.energy_per_cycle());
                    self.turn_ons += 1;
                }
            }
            Some((true, _, i_before)) if !on => {
                self.off = Some(OpenTurnOff {
                    time: point.time,
                    current: i_before,
                    drain_peak: drain,
                });
            }
            _ => {}
        }
        self.last = Some((on, drain, current));
    }

    fn cycle(&mut self, r: &CycleRecord) {
        // The record closes at the next turn-on: the flux range seen since the last
        // record is this cycle's (B is continuous across the boundary).
        let Some((lo, hi)) = self.flux_range.take() else {
            return;
        };
        if self.inside(r.start) && r.period > 0.0 {
            if let Some(c) = &self.core {
                self.sums.core += c.power(1.0 / r.period, 0.5 * (hi - lo)) * r.period;
            }
            self.cycles += 1;
        }
    }

    fn figures(&self) -> Vec<Figure> {
        let e = self.energies();
        vec![
            Figure::new("parts.transition_energy", e.transition, "J"),
            Figure::new("parts.gate_drive_energy", e.gate_drive, "J"),
            Figure::new("parts.core_energy", e.core, "J"),
            Figure::new("parts.turn_on_count", self.turn_ons as f64, "1"),
            Figure::new("parts.cycle_count", self.cycles as f64, "1"),
        ]
    }
}
