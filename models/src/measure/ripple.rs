//! Ripple: peak-to-peak and mean of one probe over a window (normally a steady-state
//! stretch of whole switching periods).

use stepflux_engine::TracePoint;

use super::catalogue::figures;
use super::window::{WindowExtremes, WindowMean};
use super::{at_point, probe_index, Figure, Measurement};
use crate::error::ModelError;
use crate::template::{Probe, UnitSymbol};

figures! {
    RIPPLE_PP = "*.ripple_pp", "*", Number, Higher, Steady,
        "ripple (p-p)", "Peak-to-peak swing of the probe over the steady window.";
    MEAN = "*.mean", "*", Number, Neither, Steady,
        "mean", "Mean of the probe over the steady window.";
    MIN = "*.min", "*", Number, Neither, Files,
        "lowest", "Lowest value of the probe over the steady window.";
    MAX = "*.max", "*", Number, Neither, Files,
        "highest", "Highest value of the probe over the steady window.";
}

/// Peak-to-peak and time average of a probe over `[from, to]`.
#[derive(Clone, Debug)]
pub struct Ripple {
    name: String,
    unit: UnitSymbol,
    column: usize,
    mean: WindowMean,
    extremes: WindowExtremes,
}

/// What [`Ripple`] found.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RippleResult {
    /// Highest minus lowest sample, in the probe's unit.
    pub peak_to_peak: f64,
    /// Time average (trapezoidal between samples), in the probe's unit.
    pub mean: f64,
    /// Lowest sample.
    pub min: f64,
    /// Highest sample.
    pub max: f64,
}

impl Ripple {
    /// Watches probe `probe` (by name) over `[from, to]` seconds.
    pub fn new(probes: &[Probe], probe: &str, from: f64, to: f64) -> Result<Self, ModelError> {
        let column = probe_index(probes, probe)?;
        if !(from.is_finite() && to > from) {
            return Err(ModelError::Infeasible(format!(
                "ripple window [{from}, {to}] s is empty"
            )));
        }
        Ok(Ripple {
            name: probe.to_string(),
            unit: probes[column].unit,
            column,
            mean: WindowMean::new(from, to),
            extremes: WindowExtremes::new(from, to),
        })
    }

    /// The result, or `None` until the window has been seen.
    pub fn result(&self) -> Option<RippleResult> {
        let (_, max) = self.extremes.max?;
        let (_, min) = self.extremes.min?;
        Some(RippleResult {
            peak_to_peak: max - min,
            mean: self.mean.mean()?,
            min,
            max,
        })
    }
}

impl Measurement for Ripple {
    fn sample(&mut self, time: f64, values: &[f64], _at_event: bool) {
        if let Some(&v) = values.get(self.column) {
            self.mean.add(time, v);
            self.extremes.add(time, v);
        }
    }

    fn trace(&mut self, point: &TracePoint<'_>) {
        if let Some((time, v, slope)) = at_point(point, self.column) {
            self.mean.add_with_slope(time, v, slope);
            self.extremes.add(time, v);
        }
    }

    fn figures(&self) -> Vec<Figure> {
        let Some(r) = self.result() else {
            return Vec::new();
        };
        let n = &self.name;
        let at =
            |d: &'static super::FigureDef, v: f64| d.scoped(&[n.as_str()], v).in_unit(self.unit);
        vec![
            at(&RIPPLE_PP, r.peak_to_peak),
            at(&MEAN, r.mean),
            at(&MIN, r.min),
            at(&MAX, r.max),
        ]
    }
}
