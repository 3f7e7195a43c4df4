//! Streaming building blocks over a time window: the time average and the extremes of a
//! sampled quantity, in O(1) state.

/// Straight line through (t0, v0) and (t1, v1) at `t` (t1 > t0).
fn lerp(t0: f64, v0: f64, t1: f64, v1: f64, t: f64) -> f64 {
    v0 + (v1 - v0) * (t - t0) / (t1 - t0)
}

/// Time average over `[from, to]`. Between two points with known slopes the quantity
/// is taken as the cubic Hermite interpolant of the two values and slopes, integrated
/// by two-point Gauss–Legendre (exact for cubics), so points of the exact solution
/// (step ends, switching instants, extrema) give the average to the order of the
/// cubic's error; between samples without slopes it is the trapezoidal rule, second
/// order in the sample spacing. The window's edges cut a segment where they fall.
#[derive(Clone, Debug)]
pub(crate) struct WindowMean {
    from: f64,
    to: f64,
    /// (time, value, slope) of the last point; slope NaN when unknown.
    last: Option<(f64, f64, f64)>,
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

    /// A sample without a slope.
    pub(crate) fn add(&mut self, t: f64, v: f64) {
        self.add_with_slope(t, v, f64::NAN);
    }

    /// A point with its slope (per second; NaN when unknown).
    pub(crate) fn add_with_slope(&mut self, t: f64, v: f64, dv: f64) {
        if let Some((t0, v0, d0)) = self.last {
            let (a, b) = (t0.max(self.from), t.min(self.to));
            if t > t0 && b > a {
                let seg = Segment {
                    t0,
                    v0,
                    d0,
                    t1: t,
                    v1: v,
                    d1: dv,
                };
                self.area += seg.integral(a, b);
                self.span += b - a;
            }
        }
        self.last = Some((t, v, dv));
    }

    /// The average, or `None` before any of the window has been seen.
    pub(crate) fn mean(&self) -> Option<f64> {
        (self.span > 0.0).then(|| self.area / self.span)
    }
}

/// Where the quantity between (t0, v0) and (t1, v1), with slopes d0 and d1 (NaN when
/// unknown), reaches `level`, which lies between v0 and v1: on the cubic Hermite
/// through the two points and slopes (the straight line without slopes), by bisection.
pub(crate) fn crossing(t0: f64, v0: f64, d0: f64, t1: f64, v1: f64, d1: f64, level: f64) -> f64 {
    let seg = Segment {
        t0,
        v0,
        d0,
        t1,
        v1,
        d1,
    };
    let (mut a, mut b) = (t0, t1);
    let below = v0 < level;
    for _ in 0..60 {
        let m = 0.5 * (a + b);
        if (seg.at(m) < level) == below {
            a = m;
        } else {
            b = m;
        }
    }
    0.5 * (a + b)
}

/// The quantity between two points: cubic Hermite when both slopes are known, else
/// the straight line.
struct Segment {
    t0: f64,
    v0: f64,
    d0: f64,
    t1: f64,
    v1: f64,
    d1: f64,
}

impl Segment {
    fn at(&self, t: f64) -> f64 {
        let h = self.t1 - self.t0;
        if !(self.d0.is_finite() && self.d1.is_finite()) {
            return lerp(self.t0, self.v0, self.t1, self.v1, t);
        }
        let s = (t - self.t0) / h;
        let (s2, s3) = (s * s, s * s * s);
        (2.0 * s3 - 3.0 * s2 + 1.0) * self.v0
            + (s3 - 2.0 * s2 + s) * h * self.d0
            + (-2.0 * s3 + 3.0 * s2) * self.v1
            + (s3 - s2) * h * self.d1
    }

    /// ∫ₐᵇ, two-point Gauss–Legendre (exact for the cubic and the line).
    fn integral(&self, a: f64, b: f64) -> f64 {
        let (m, r) = (0.5 * (a + b), 0.5 * (b - a));
        let x = r / 3f64.sqrt();
        r * (self.at(m - x) + self.at(m + x))
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
