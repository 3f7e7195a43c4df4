//! Source waveforms: constant or piecewise-linear in time.
//!
//! Between breakpoints a source is affine in time, which the engine integrates exactly
//! by carrying the value and its slope in the augmented state. Breakpoints are
//! scheduled stops: the engine steps to them, it never searches for them.

use crate::error::EngineError;

/// Value of an independent source over time.
#[derive(Clone, Debug, PartialEq)]
pub enum Waveform {
    /// The same value for all time.
    Constant(f64),
    /// Linear interpolation through (time in seconds, value) points with
    /// non-decreasing times; held constant before the first and after the last.
    /// Two points at the same time make a step.
    PiecewiseLinear(Vec<(f64, f64)>),
}

/// Value and slope of a waveform on the segment that starts at a time.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Segment {
    /// Value at the query time.
    pub value: f64,
    /// Slope per second until `until`.
    pub slope: f64,
    /// Time of the next breakpoint strictly after the query time, if any.
    pub until: Option<f64>,
}

impl Waveform {
    /// Checks the points are finite and in time order.
    pub fn validate(&self, element: &str) -> Result<(), EngineError> {
        match self {
            Waveform::Constant(v) if v.is_finite() => Ok(()),
            Waveform::Constant(v) => Err(EngineError::BadValue {
                element: element.to_string(),
                what: "source value",
                value: *v,
                allowed: "a finite number",
            }),
            Waveform::PiecewiseLinear(points) => {
                if points.is_empty() {
                    return Err(EngineError::BadValue {
                        element: element.to_string(),
                        what: "number of waveform points",
                        value: 0.0,
                        allowed: "at least one (time, value) point",
                    });
                }
                for (i, &(t, v)) in points.iter().enumerate() {
                    let ordered = i == 0 || t >= points[i - 1].0;
                    if !t.is_finite() || !v.is_finite() || !ordered {
                        return Err(EngineError::BadValue {
                            element: element.to_string(),
                            what: "waveform point time",
                            value: t,
                            allowed: "finite points with non-decreasing times",
                        });
                    }
                }
                Ok(())
            }
        }
    }

    /// The segment in force just after time `t` (right-continuous at steps).
    pub fn segment(&self, t: f64) -> Segment {
        match self {
            Waveform::Constant(v) => Segment {
                value: *v,
                slope: 0.0,
                until: None,
            },
            Waveform::PiecewiseLinear(p) => {
                // Index of the first point strictly after t.
                let next = p.partition_point(|&(tp, _)| tp <= t);
                if next == 0 {
                    return Segment {
                        value: p[0].1,
                        slope: 0.0,
                        until: Some(p[0].0),
                    };
                }
                if next == p.len() {
                    return Segment {
                        value: p[p.len() - 1].1,
                        slope: 0.0,
                        until: None,
                    };
                }
                let (t0, v0) = p[next - 1];
                let (t1, v1) = p[next];
                let slope = (v1 - v0) / (t1 - t0);
                Segment {
                    value: v0 + slope * (t - t0),
                    slope,
                    until: Some(t1),
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn piecewise_linear_segments_interpolate_and_step() {
        let w = Waveform::PiecewiseLinear(vec![(1.0, 0.0), (3.0, 4.0), (3.0, 10.0)]);
        assert_eq!(
            w.segment(0.0),
            Segment {
                value: 0.0,
                slope: 0.0,
                until: Some(1.0)
            }
        );
        assert_eq!(
            w.segment(2.0),
            Segment {
                value: 2.0,
                slope: 2.0,
                until: Some(3.0)
            }
        );
        assert_eq!(
            w.segment(3.0),
            Segment {
                value: 10.0,
                slope: 0.0,
                until: None
            }
        );
    }
}
