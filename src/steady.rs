//! The periodic steady state as `summary.json` and `--json` write it: every state by
//! name, how it was found, and what one steady period shows. Found by
//! [`stepflux_models::job::steady`].

use serde::Serialize;
use stepflux_models::cycles::CycleRecord;
use stepflux_models::steady::SteadyState;

/// One state of the steady operating point, for `summary.json` and `--json`.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct StateValue {
    /// Owner element's name.
    pub name: String,
    /// "inductor current", "capacitor voltage" or "block state".
    pub kind: &'static str,
    /// SI unit ("" for a block state).
    pub unit: &'static str,
    /// Value at the period boundary, SI.
    pub value: f64,
}

/// The converged state and how it was found.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct SteadyReport {
    /// Every state by name at the period boundary.
    pub states: Vec<StateValue>,
    /// Period of the map, seconds.
    pub period_s: f64,
    /// Periods simulated to find it.
    pub periods: usize,
    /// Difference Jacobians formed.
    pub jacobians: usize,
    /// Weighted residual norm per accepted iterate (≤ 1: within tolerance).
    pub residual_history: Vec<f64>,
    /// Largest Floquet multiplier modulus (< 1: stable).
    pub spectral_radius: f64,
}

impl From<&SteadyState> for SteadyReport {
    fn from(s: &SteadyState) -> Self {
        SteadyReport {
            states: s
                .names
                .iter()
                .zip(&s.x)
                .map(|(n, &value)| StateValue {
                    name: n.name.clone(),
                    kind: n.class.describe(),
                    unit: n.class.unit(),
                    value,
                })
                .collect(),
            period_s: s.period,
            periods: s.work.periods,
            jacobians: s.work.newton,
            residual_history: s.history.clone(),
            spectral_radius: s.spectral_radius,
        }
    }
}

/// What one steady switching period shows, from its cycle record.
#[derive(Clone, Copy, Debug, Serialize, PartialEq)]
pub struct PeriodFigures {
    /// Main-switch on-time over the period.
    pub duty: f64,
    /// Time from the end of reset to the next turn-on over the period (None: the core
    /// did not reset).
    pub reset_margin: Option<f64>,
    /// Highest magnetising current, amperes.
    pub mag_current_peak_a: f64,
    /// Highest |B|, tesla.
    pub flux_density_peak_t: f64,
    /// Highest drain voltage, volts.
    pub drain_peak_v: f64,
}

impl From<&CycleRecord> for PeriodFigures {
    fn from(r: &CycleRecord) -> Self {
        PeriodFigures {
            duty: r.duty,
            reset_margin: r.reset_margin().map(|t| t / r.period),
            mag_current_peak_a: r.mag_current_peak,
            flux_density_peak_t: r.b_peak,
            drain_peak_v: r.drain_peak,
        }
    }
}
