//! Streaming building blocks over a time window: the time average and the extremes of a
//! sampled quantity, in O(1) state.

/// Straight line through (t0, v0) and (t1, v1) at `t` (t1 > t0).
fn lerp(t0: f64, v0: f64, t1: f64, v1: f64, t: f64) -> f64 {
    v0 + (v1 - v0) * (t - t0) / (t1 - t0)
}

/// Time average over `[from, to]` by the trapezoidal rule between samples, the window
/// edges interpolated. Its error is second order in the sample spacing, and nothing
/// where the quantity is piecewise linear between samples.
#[derive(Clone, Debug)]
pub(crate) struct WindowMean {
    from: f64,
    to: f64,
    last: Option<(f64, f64)>,
    area: f64,
    span: f64,
}

impl WindowMean {
    pub(crate) fn new(from: f64, to: f64) -> Self {
        WindowMean {
            from,
            to,
            last: None,
            area: 0.0,
            span: 0.0,
        }
    }

    pub(crate) fn add(&mut self, t: f64, v: f64) {
        if let Some((t0, v0)) = self.last {
            let (a, b) = (t0.max(self.from), t.min(self.to));
            if t > t0 && b > a {
                let (va, vb) = (lerp(t0, v0, t, v, a), lerp(t0, v0, t, v, b));
                self.area += 0.5 * (va + vb) * (b - a);
                self.span += b - a;
            }
        }
        self.last = Some((t, v));
    }

    /// The average, or `None` before any of the window has been seen.
    pub(crate) fn mean(&self) -> Option<f64> {
        (self.span > 0.0).then(|| self.area / self.span)
    }
}

/// Highest and lowest sample in `[from, to]`, with their times.
#[derive(Clone, Debug)]
pub(crate) struct WindowExtremes {
    from: f64,
    to: f64,
    /// (time, value) of the highest sample.
    pub(crate) max: Option<(f64, f64)>,
    /// (time, value) of the lowest sample.
    pub(crate) min: Option<(f64, f64)>,
}

impl WindowExtremes {
    pub(crate) fn new(from: f64, to: f64) -> Self {
        WindowExtremes {
            from,
            to,
            max: None,
            min: None,
        }
    }

    pub(crate) fn add(&mut self, t: f64, v: f64) {
        if t < self.from || t > self.to {
            return;
        }
        if self.max.is_none_or(|(_, m)| v > m) {
            self.max = Some((t, v));
        }
        if self.min.is_none_or(|(_, m)| v < m) {
            self.min = Some((t, v));
        }
    }
}

/// Highest and lowest value of a per-cycle quantity (such as the duty) over the cycles
/// that start in `[from, to)`.
#[derive(Clone, Debug)]
pub(crate) struct CycleRange {
    from: f64,
    to: f64,
    pub(crate) max: Option<f64>,
    pub(crate) min: Option<f64>,
}

impl CycleRange {
    pub(crate) fn new(from: f64, to: f64) -> Self {
        CycleRange {
            from,
            to,
            max: None,
            min: None,
        }
    }

    pub(crate) fn add(&mut self, start: f64, v: f64) {
        if start < self.from || start >= self.to {
            return;
        }
        self.max = Some(self.max.map_or(v, |m| m.max(v)));
        self.min = Some(self.min.map_or(v, |m| m.min(v)));
    }

    /// max − min, or `None` without a cycle in the window.
    pub(crate) fn spread(&self) -> Option<f64> {
        Some(self.max? - self.min?)
    }
}
