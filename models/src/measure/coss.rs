//! The main switch's output-capacitance energy released at each turn-on.
//!
//! The switch is a two-valued resistor with Coss across it, so whatever Coss holds at
//! turn-on it releases within a few R_on·Coss, and that energy is part of the channel's
//! metered v·i. At each turn-on it is ½·Coss·(V_on² − V_after²), V_on the drain voltage
//! at the gate instant (the capacitor's voltage cannot jump) and V_after = R_on·i the
//! on-state drop, which is left out: it changes the figure by (R_on·i/V_on)², under
//! 1e-4 for any hard-switched converter. This is the capacitive turn-on loss ½·C·V²
//! per cycle of R. W. Erickson & D. Maksimović, *Fundamentals of Power Electronics*,
//! 2nd ed., §4.3 (switching loss) (from memory). The rest of the channel's v·i —
//! the energy the circuit delivers to the device while it conducts, plus off-state
//! leakage — is conduction loss; the two add up to the metered total exactly.
//!
//! Only the main (low-side) switch is split this way: its drain voltage at turn-on is
//! in the cycle record. A high-side or auxiliary switch's Coss energy stays inside its
//! own v·i.

use super::catalogue::figures;
use super::{Figure, Measurement};
use crate::cycles::CycleRecord;

figures! {
    TURN_ON_ENERGY = "coss.turn_on_energy", "J", Number, Higher, Files,
        "switch turn-on energy", "Energy of the main switch's output capacitance dissipated at turn-on over the steady window, ½·C·V² per turn-on.";
    TURN_ON_COUNT = "coss.turn_on_count", "1", Count, Neither, Files,
        "turn-ons counted", "Turn-ons in the steady window.";
}

/// Σ ½·Coss·V_on² over the main switch's turn-ons in `[from, to)`.
#[derive(Clone, Debug, PartialEq)]
pub struct CossTurnOn {
    capacitance: f64,
    from: f64,
    to: f64,
    energy: f64,
    count: usize,
}

impl CossTurnOn {
    /// Sums turn-ons of a switch with `capacitance` farads of Coss that fall in
    /// `[from, to)` seconds (use the loss report's window).
    pub fn new(capacitance: f64, from: f64, to: f64) -> Self {
        CossTurnOn {
            capacitance,
            from,
            to,
            energy: 0.0,
            count: 0,
        }
    }

    /// Joules released so far.
    pub fn energy(&self) -> f64 {
        self.energy
    }

    /// Turn-ons counted.
    pub fn count(&self) -> usize {
        self.count
    }
}

impl Measurement for CossTurnOn {
    fn cycle(&mut self, r: &CycleRecord) {
        if r.start >= self.from && r.start < self.to {
            self.energy += 0.5 * self.capacitance * r.drain_start * r.drain_start;
            self.count += 1;
        }
    }

    fn figures(&self) -> Vec<Figure> {
        vec![TURN_ON_ENERGY.of(self.energy), TURN_ON_COUNT.of(self.count)]
    }
}
