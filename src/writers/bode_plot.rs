//! The Bode plot of `stepflux loop`: loop-gain magnitude (dB) above phase (degrees)
//! against log frequency; the switching model's sampled-data curve solid, its injected
//! response as circles at the points injected, the averaged model's dashed in a third
//! colour; crossover and the phase crossover as thin vertical lines with the margins
//! written beside them.

use std::path::Path;

use anyhow::Result;
use plotters::coord::Shift;
use plotters::prelude::*;

use super::frequency_panel::{legend, Chart, Models, Plotted, AVERAGED, INJECTED, SAMPLED};
use crate::check::eng;
use crate::loop_cmd::{Curves, InjectedCurves, LoopReport, MarginReport};

const MARK: RGBColor = RGBColor(120, 120, 120);

type Panel<'a> = DrawingArea<SVGBackend<'a>, Shift>;

/// Writes the SVG.
pub fn plot(r: &LoopReport, out: &Path) -> Result<()> {
    let root = SVGBackend::new(out, (900, 700)).into_drawing_area();
    let draw = || -> Plotted {
        root.fill(&WHITE)?;
        let root = root.titled(
            &format!(
                "{}: loop gain, broken at the modulator's control input",
                r.scenario
            ),
            ("sans-serif", 18),
        )?;
        let (top, bottom) = root.split_vertically(340);
        panel(&top, r, Which::Magnitude)?;
        panel(&bottom, r, Which::Phase)?;
        root.present()?;
        Ok(())
    };
    draw().map_err(|e| anyhow::anyhow!("drawing {}: {e}", out.display()))
}

#[derive(Clone, Copy, PartialEq)]
enum Which {
    Magnitude,
    Phase,
}

fn values(c: &Curves, w: Which) -> &[f64] {
    match w {
        Which::Magnitude => &c.loop_gain_db,
        Which::Phase => &c.loop_gain_deg,
    }
}

fn injected_values(c: &InjectedCurves, w: Which) -> &[f64] {
    match w {
        Which::Magnitude => &c.loop_gain_db,
        Which::Phase => &c.loop_gain_deg,
    }
}

fn panel(area: &Panel, r: &LoopReport, w: Which) -> Plotted {
    let f = &r.frequency_hz;
    let (f0, f1) = (f[0], f[f.len() - 1]);
    let models = Models {
        sampled: r.sampled.as_ref().map(|c| values(c, w)),
        injected: r.injected.as_ref().map(|c| injected_values(c, w)),
        averaged: r.averaged.as_ref().map(|c| values(c, w)),
    };
    let (lo, hi) = models.range();
    let (lo, hi) = match w {
        Which::Magnitude => (lo.min(-10.0) - 5.0, hi.max(10.0) + 5.0),
        Which::Phase => (lo.min(-180.0) - 15.0, hi + 15.0),
    };
    let mut chart = ChartBuilder::on(area)
        .margin(12)
        .x_label_area_size(40)
        .y_label_area_size(60)
        .build_cartesian_2d((f0..f1).log_scale(), lo..hi)?;
    chart
        .configure_mesh()
        .x_desc("frequency (Hz)")
        .y_desc(match w {
            Which::Magnitude => "|T| (dB)",
            Which::Phase => "phase of T (°)",
        })
        .x_label_formatter(&|v| eng(*v, "Hz"))
        .draw()?;
    let reference = match w {
        Which::Magnitude => 0.0,
        Which::Phase => -180.0,
    };
    chart.draw_series(LineSeries::new(
        [(f0, reference), (f1, reference)],
        MARK.stroke_width(1),
    ))?;
    models.draw(&mut chart, f)?;
    if let Some(c) = &r.sampled {
        marks(&mut chart, &c.margins, SAMPLED, (lo, hi), w, 0)?;
    }
    if let Some(c) = &r.injected {
        marks(&mut chart, &c.margins, INJECTED, (lo, hi), w, 1)?;
    }
    if let Some(a) = &r.averaged {
        marks(&mut chart, &a.margins, AVERAGED, (lo, hi), w, 2)?;
    }
    if w == Which::Magnitude {
        legend(&mut chart, SeriesLabelPosition::UpperRight)?;
    }
    Ok(())
}

/// Thin vertical lines at crossover (with the phase margin written on the phase panel)
/// and at the phase crossover (with the gain margin on the magnitude panel); each model's
/// text on its own `row`.
fn marks(
    chart: &mut Chart,
    m: &MarginReport,
    colour: RGBColor,
    (lo, hi): (f64, f64),
    w: Which,
    row: usize,
) -> Plotted {
    let style = colour.mix(0.6).stroke_width(1);
    let text = ("sans-serif", 13).into_font().color(&colour);
    let y_text = lo + (0.08 + 0.07 * row as f64) * (hi - lo);
    if let Some(fc) = m.crossover_hz {
        chart.draw_series(LineSeries::new([(fc, lo), (fc, hi)], style))?;
        if let (Which::Phase, Some(pm)) = (w, m.phase_margin_deg) {
            chart.draw_series(std::iter::once(Text::new(
                format!("{}  PM {pm:.1}°", eng(fc, "Hz")),
                (fc * 1.05, y_text),
                text.clone(),
            )))?;
        }
    }
    if let Some(fp) = m.phase_crossover_hz {
        chart.draw_series(LineSeries::new([(fp, lo), (fp, hi)], style))?;
        if let (Which::Magnitude, Some(gm)) = (w, m.gain_margin_db) {
            chart.draw_series(std::iter::once(Text::new(
                format!("GM {gm:.1} dB"),
                (fp / 1.6, y_text),
                text,
            )))?;
        }
    }
    Ok(())
}
