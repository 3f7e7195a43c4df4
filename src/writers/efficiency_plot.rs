//! The efficiency plot: efficiency against output power, one colour per input voltage;
//! the power stage as a solid line with round markers, the whole converter with the
//! fixed bias power as a dashed line with square markers in the same colour.

use std::path::Path;

use anyhow::Result;
use plotters::prelude::*;

use crate::efficiency_cmd::Point;

/// Our own palette: distinct on white and in grey print.
const COLOURS: [RGBColor; 5] = [
    RGBColor(0, 110, 120),
    RGBColor(190, 80, 20),
    RGBColor(70, 60, 150),
    RGBColor(40, 130, 40),
    RGBColor(150, 30, 90),
];

type Curve = Vec<(f64, f64)>;

/// (line, stage curve, with-bias curve) per input voltage, points by output power.
fn curves(points: &[Point]) -> Vec<(f64, Curve, Curve)> {
    let mut lines: Vec<f64> = points.iter().map(|p| p.line_v).collect();
    lines.sort_by(f64::total_cmp);
    lines.dedup();
    lines
        .into_iter()
        .map(|v| {
            let mut stage = Vec::new();
            let mut bias = Vec::new();
            for p in points.iter().filter(|p| p.line_v == v) {
                let Some(o) = &p.point else { continue };
                if let (Some(po), Some(e), Some(eb)) = (
                    o.get("power.out"),
                    o.get("efficiency.stage"),
                    o.get("efficiency.with_bias"),
                ) {
                    stage.push((po, 100.0 * e));
                    bias.push((po, 100.0 * eb));
                }
            }
            stage.sort_by(|a, b| a.0.total_cmp(&b.0));
            bias.sort_by(|a, b| a.0.total_cmp(&b.0));
            (v, stage, bias)
        })
        .collect()
}

/// Writes the SVG.
pub fn plot(points: &[Point], bias_w: f64, out: &Path) -> Result<()> {
    let sets = curves(points);
    let all = || sets.iter().flat_map(|s| s.1.iter().chain(&s.2));
    let x1 = all().map(|p| p.0).fold(0.0, f64::max).max(1e-3) * 1.05;
    let y0 = all().map(|p| p.1).fold(100.0, f64::min);
    let y1 = all().map(|p| p.1).fold(0.0, f64::max);
    let pad = ((y1 - y0) * 0.1).max(0.5);
    let root = SVGBackend::new(out, (900, 600)).into_drawing_area();
    let draw = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        root.fill(&WHITE)?;
        let mut chart = ChartBuilder::on(&root)
            .caption(
                format!(
                    "Steady-state efficiency (bias power {})",
                    crate::check::eng(bias_w, "W")
                ),
                ("sans-serif", 18),
            )
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(56)
            .build_cartesian_2d(0.0..x1, (y0 - pad)..(y1 + pad).min(100.0))?;
        chart
            .configure_mesh()
            .x_desc("output power (W)")
            .y_desc("efficiency (%)")
            .draw()?;
        for (k, (v, stage, bias)) in sets.iter().enumerate() {
            let c = COLOURS[k % COLOURS.len()];
            chart
                .draw_series(LineSeries::new(stage.iter().copied(), c.stroke_width(2)))?
                .label(format!("{}, power stage", crate::check::eng(*v, "V")))
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 20, y)], c.stroke_width(2))
                });
            chart.draw_series(stage.iter().map(|&p| Circle::new(p, 4, c.filled())))?;
            chart
                .draw_series(DashedLineSeries::new(
                    bias.iter().copied(),
                    8,
                    5,
                    c.stroke_width(2),
                ))?
                .label(format!("{}, with bias", crate::check::eng(*v, "V")))
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 8, y)], c.stroke_width(2))
                });
            chart
                .draw_series(bias.iter().map(|&p| {
                    EmptyElement::at(p) + Rectangle::new([(-4, -4), (4, 4)], c.filled())
                }))?;
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::LowerRight)
            .background_style(WHITE.mix(0.85))
            .border_style(BLACK)
            .draw()?;
        root.present()?;
        Ok(())
    };
    draw().map_err(|e| anyhow::anyhow!("drawing {}: {e}", out.display()))
}
