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

use super::catalogue::figures;
use super::{probe_index, Figure, Measurement};
use crate::components::{CoreLoss, GateDrive, Transitions};
use crate::cycles::CycleRecord;
use crate::error::ModelError;
use crate::template::{ForwardDesign, Probe};

figures! {
    TRANSITION_ENERGY = "parts.transition_energy", "J", Number, Higher, Files,
        "transition energy", "Main-switch transition energy over the steady window.";
    GATE_DRIVE_ENERGY = "parts.gate_drive_energy", "J", Number, Higher, Files,
        "gate-drive energy", "Gate-drive energy over the steady window.";
    CORE_ENERGY = "parts.core_energy", "J", Number, Higher, Files,
        "core-loss energy", "Steinmetz core-loss energy over the steady window.";
    TURN_ON_COUNT = "parts.turn_on_count", "1", Count, Neither, Files,
        "turn-ons", "Main-switch turn-ons in the steady window.";
    CYCLE_COUNT = "parts.cycle_count", "1", Count, Neither, Files,
        "cycles", "Cycles in the steady window counted for core loss.";
}
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
            TRANSITION_ENERGY.of(e.transition),
            GATE_DRIVE_ENERGY.of(e.gate_drive),
            CORE_ENERGY.of(e.core),
            TURN_ON_COUNT.of(self.turn_ons),
            CYCLE_COUNT.of(self.cycles),
        ]
    }
}

#[cfg(test)]
mod tests {
    //! The modelled losses against their closed forms on a hand-made trace: one switching
    //! cycle of known drain voltage, switch current and flux, so every expected value is
    //! a product worked out by hand.

    use super::*;
    use crate::demo_design::demo_design;
    use stepflux_engine::{Topology, TraceKind};

    const BIT: usize = 3;
    const T: f64 = 1.0 / 150e3;

    /// Feeds one cycle from turn-on at 0: the drain holds `v_on` before turn-on, the
    /// switch carries `i_on` just after it and `i_off` just before turn-off at D·T, the
    /// drain then rises to `v_off` (its plateau) and falls back to `v_on`; the flux runs
    /// from `-b` to `+b` while on. Then the cycle record and the next turn-on.
    fn one_cycle(m: &mut PartLosses, v_on: f64, i_on: f64, i_off: f64, v_off: f64, b: f64) {
        let [d, c, f] = m.probes();
        let point = |m: &mut PartLosses, t: f64, on: bool, drain: f64, i: f64, flux: f64| {
            let mut values = vec![f64::NAN; 20];
            values[d] = drain;
            values[c] = i;
            values[f] = flux;
            let slopes = vec![f64::NAN; 20];
            m.trace(&TracePoint {
                time: t,
                values: &values,
                slopes: &slopes,
                kind: TraceKind::Event,
                topology: Topology::default().with(BIT, on),
            });
        };
        let on_at = 0.3 * T;
        point(m, 0.0, false, v_on, 0.0, -b);
        point(m, 0.0, true, 0.05, i_on, -b);
        point(m, on_at, true, 0.1, i_off, b);
        point(m, on_at, false, 0.5 * v_off, 0.0, b);
        point(m, 0.4 * T, false, v_off, 0.0, 0.0);
        point(m, 0.9 * T, false, v_on, 0.0, -b);
        m.cycle(&CycleRecord {
            index: 0,
            start: 0.0,
            period: T,
            duty: 0.3,
            mag_current_start: 0.0,
            mag_current_peak: 0.0,
            reset_end: None,
            reset_incomplete: false,
            drain_start: 0.05,
            drain_peak: v_off,
            b_peak: b,
        });
        point(m, T, false, v_on, 0.0, -b);
        point(m, T, true, 0.05, i_on, -b);
    }

    fn losses(edit: impl FnOnce(&mut ForwardDesign)) -> PartLosses {
        let mut d = demo_design();
        edit(&mut d);
        let conv = d.build().expect("demo builds");
        // The window holds the first cycle only: the second turn-on at T is outside.
        let mut m = PartLosses::new(&d, &conv.probes, 0.0, T).expect("probes exist");
        m.watch_switch(Some(BIT));
        m
    }

    #[test]
    fn transition_loss_is_half_v_i_t_per_transition() {
        // Common practice (linear voltage and current ramps overlapping): ½·V·I·t per
        // transition. Turn-on: ½·24 V·2 A·20 ns = 0.48 µJ; turn-off: ½·48 V·3 A·30 ns
        // = 2.16 µJ. Sum 2.64 µJ; at 150 kHz, 0.396 W. Exact arithmetic, so 1e-12.
        let mut m = losses(|d| {
            d.switch.transitions = Some(Transitions::Times {
                rise_time: 20e-9,
                fall_time: 30e-9,
            })
        });
        one_cycle(&mut m, 24.0, 2.0, 3.0, 48.0, 0.05);
        let e = m.energies().transition;
        assert!((e - 2.64e-6).abs() < 1e-12 * 2.64e-6 + 1e-21, "{e:e}");
        // At equal V and I the pair is ½·V·I·(t_r + t_f): 24 V, 2 A both ways.
        let mut m = losses(|d| {
            d.switch.transitions = Some(Transitions::Times {
                rise_time: 20e-9,
                fall_time: 30e-9,
            })
        });
        one_cycle(&mut m, 24.0, 2.0, 2.0, 24.0, 0.05);
        let pair = 0.5 * 24.0 * 2.0 * (20e-9 + 30e-9);
        assert!((m.energies().transition - pair).abs() < 1e-12 * pair);
    }

    #[test]
    fn transition_energies_are_counted_once_per_transition() {
        let mut m = losses(|d| {
            d.switch.transitions = Some(Transitions::Energy {
                turn_on: 1e-6,
                turn_off: 2e-6,
            })
        });
        one_cycle(&mut m, 24.0, 2.0, 3.0, 48.0, 0.05);
        // One turn-on and one turn-off inside the window: 3 µJ.
        assert!((m.energies().transition - 3e-6).abs() < 1e-18);
    }

    #[test]
    fn gate_drive_is_qg_vdrive_per_cycle() {
        // Common practice: P = Qg·Vdrive·f; 15 nC·10 V = 150 nJ per cycle, 22.5 mW at
        // 150 kHz.
        let mut m = losses(|d| {
            d.switch.gate_drive = Some(GateDrive {
                charge: 15e-9,
                drive_voltage: 10.0,
            })
        });
        one_cycle(&mut m, 24.0, 2.0, 3.0, 48.0, 0.05);
        let e = m.energies().gate_drive;
        assert!((e - 150e-9).abs() < 1e-21, "{e:e}");
        assert!((e / T - 22.5e-3).abs() < 1e-12);
    }

    #[test]
    fn core_loss_is_steinmetz_at_the_cycle_frequency_and_half_swing() {
        // Hand calculation of P = k·f^α·B̂^β·V (Steinmetz 1892) with k = 2.2, α = 1.4,
        // β = 2.5, V = 1.6 cm³, f = 150 kHz and a swing from −50 mT to +50 mT, so
        // B̂ = 50 mT: f^1.4 = e^(1.4·ln 150000) = e^(1.4·11.91839) = e^16.68575
        // = 1.76412e7; B̂^2.5 = 0.05²·√0.05 = 0.0025·0.223607 = 5.59017e-4;
        // P = 2.2·1.76412e7·5.59017e-4·1.6e-6 = 3.47133e-2 W. Energy over the cycle
        // P·T = 2.31422e-7 J. The hand figures carry 6 digits: 1e-5 relative.
        let mut m = losses(|_| {});
        one_cycle(&mut m, 24.0, 2.0, 3.0, 48.0, 0.05);
        let p = m.energies().core / T;
        assert!((p - 3.47133e-2).abs() < 1e-5 * 3.47133e-2, "{p:e}");
    }

    #[test]
    fn nothing_modelled_costs_nothing() {
        let mut m = losses(|d| {
            d.switch.transitions = None;
            d.switch.gate_drive = None;
            d.transformer.core_loss = None;
        });
        assert!(!m.any());
        one_cycle(&mut m, 24.0, 2.0, 3.0, 48.0, 0.05);
        assert_eq!(m.energies(), PartEnergies::default());
    }
}
