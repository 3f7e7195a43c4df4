//! What the frequency-response plots of `stepflux loop` share ([`super::bode_plot`],
//! [`super::response_plot`]): the three models' colours, the value range over the
//! curves shown, and the curves themselves on a log-frequency chart — the switching
//! model's sampled-data curve solid, its injected response as circles at the points
//! injected, the averaged model's dashed.

use plotters::coord::combinators::LogCoord;
use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;

pub const SAMPLED: RGBColor = RGBColor(0, 110, 120);
pub const AVERAGED: RGBColor = RGBColor(190, 80, 20);
pub const INJECTED: RGBColor = RGBColor(90, 60, 160);

pub type Plotted = std::result::Result<(), Box<dyn std::error::Error>>;
pub type Chart<'a, 'b> =
    ChartContext<'a, SVGBackend<'b>, Cartesian2d<LogCoord<f64>, RangedCoordf64>>;

/// One quantity on the frequency grid, per model shown.
pub struct Models<'v> {
    pub sampled: Option<&'v [f64]>,
    pub injected: Option<&'v [f64]>,
    pub averaged: Option<&'v [f64]>,
}

impl Models<'_> {
    /// Lowest and highest finite value over every model shown (infinite when none is).
    pub fn range(&self) -> (f64, f64) {
        let all = [self.sampled, self.injected, self.averaged];
        let values = all.iter().flatten().flat_map(|v| v.iter().copied());
        values
            .filter(|v| v.is_finite())
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
                (lo.min(v), hi.max(v))
            })
    }

    /// Draws each model's curve against `f`, with its legend entry.
    pub fn draw(&self, chart: &mut Chart, f: &[f64]) -> Plotted {
        let pts =
            |v: &[f64]| -> Vec<(f64, f64)> { f.iter().copied().zip(v.iter().copied()).collect() };
        if let Some(v) = self.sampled {
            chart
                .draw_series(LineSeries::new(pts(v), SAMPLED.stroke_width(2)))?
                .label("switching model (sampled-data)")
                .legend(|(x, y)| {
                    PathElement::new(vec![(x, y), (x + 20, y)], SAMPLED.stroke_width(2))
                });
        }
        if let Some(v) = self.injected {
            chart
                .draw_series(
                    pts(v)
                        .into_iter()
                        .map(|p| Circle::new(p, 3, INJECTED.stroke_width(1))),
                )?
                .label("switching model (injection)")
                .legend(|(x, y)| Circle::new((x + 10, y), 3, INJECTED.stroke_width(1)));
        }
        if let Some(v) = self.averaged {
            chart
                .draw_series(DashedLineSeries::new(
                    pts(v),
                    8,
                    5,
                    AVERAGED.stroke_width(2),
                ))?
                .label("averaged")
                .legend(|(x, y)| {
                    PathElement::new(vec![(x, y), (x + 8, y)], AVERAGED.stroke_width(2))
                });
        }
        Ok(())
    }
}

/// The legend box at `position`.
pub fn legend<'b>(chart: &mut Chart<'b, 'b>, position: SeriesLabelPosition) -> Plotted {
    chart
        .configure_series_labels()
        .position(position)
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .draw()?;
    Ok(())
}
