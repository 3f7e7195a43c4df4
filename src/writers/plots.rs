//! SVG plots read back from a waveform file. Long signals are reduced to the minimum
//! and maximum of each pixel column while reading in blocks, so a plot of a long run
//! keeps every sampled peak yet needs memory only for the picture; where there are
//! many more samples than pixels the column extremes are drawn as a filled band.
//! Axes read in engineering units ("time (ms)", "magnetising current (mA)") with one
//! prefix per axis, and known limits (Bsat, a rating) are drawn as dashed lines.

use std::path::Path;

use anyhow::{bail, Context, Result};
use hdf5_metno as h5;
use plotters::prelude::*;

use crate::eng::axis_prefix;

/// Horizontal resolution of a plot, pixels; also the number of min/max buckets.
const WIDTH: u32 = 1000;
/// Height of one panel, pixels.
const PANEL_HEIGHT: u32 = 280;
/// Samples read per block.
const BLOCK: usize = 65_536;
/// More samples per bucket than this and the trace is drawn as a min/max band: a
/// line through single samples would zig-zag within one pixel column.
const BAND_SAMPLES_PER_BUCKET: usize = 3;

/// A horizontal line at a known limit: value in the signal's unit, and its name.
#[derive(Clone, Debug, PartialEq)]
pub struct Marker {
    pub value: f64,
    pub label: String,
}

/// One signal to plot and the limits to mark on its panel.
#[derive(Clone, Debug, PartialEq)]
pub struct Panel {
    pub signal: String,
    pub markers: Vec<Marker>,
}

impl Panel {
    /// A panel of `signal` with no markers.
    pub fn of(signal: &str) -> Self {
        Panel {
            signal: signal.into(),
            markers: Vec::new(),
        }
    }
}

/// What to plot: the x dataset, an optional window on it, the title.
pub struct Plot<'a> {
    pub x: &'a str,
    /// Only samples with from ≤ x ≤ to (either end open).
    pub window: (Option<f64>, Option<f64>),
    pub title: &'a str,
}

/// One trace: per-bucket (x, min, max), and whether it is dense enough for a band.
struct Trace {
    unit: String,
    buckets: Vec<(f64, f64, f64)>,
    dense: bool,
}

fn unit_of(ds: &h5::Dataset) -> String {
    ds.attr("unit")
        .and_then(|a| a.read_scalar::<h5::types::VarLenUnicode>())
        .map(|u| u.as_str().to_string())
        .unwrap_or_default()
}

/// What a person calls a signal on an axis; unknown names are shown as they are.
pub fn label_of(name: &str) -> &str {
    match name {
        "time" | "cycles/start" => "time",
        "out.v" => "output voltage",
        "lout.i" => "inductor current",
        "drain.v" => "drain voltage",
        "mag.i" => "magnetising current",
        "core.b" => "flux density",
        "in.v" => "input voltage",
        "in.i" => "input current",
        "sw.i" => "switch current",
        "reset.i" => "reset current",
        "reset.v" => "reset voltage",
        "clamp.v" => "clamp voltage",
        "rect.i" => "rectifier current",
        "rect.v" => "rectifier voltage",
        "fw.i" => "freewheel current",
        "fw.v" => "freewheel voltage",
        "ctl.vc" => "control voltage",
        "ctl.ea.v" => "error amplifier output",
        "ctl.ca.v" => "current-limit amplifier output",
        "ctl.ref.v" => "reference voltage",
        "cycles/duty" => "duty",
        other => other.strip_prefix("cycles/").unwrap_or(other),
    }
}

/// Scale and axis unit text for values in `unit` spanning `extent`: one SI prefix for
/// the whole axis; a pure-number duty reads in percent.
fn axis_unit(name: &str, unit: &str, extent: f64) -> (f64, String) {
    match unit {
        "1" | "" if name.ends_with("duty") => (100.0, "%".into()),
        "1" | "" | "%" => (1.0, unit.replace('1', "")),
        _ => {
            let (scale, prefix) = axis_prefix(extent);
            (scale, format!("{prefix}{unit}"))
        }
    }
}

/// "duty (%)", "time (ms)", "flux density (mT)".
fn axis_desc(name: &str, unit: &str) -> String {
    if unit.is_empty() {
        label_of(name).to_string()
    } else {
        format!("{} ({unit})", label_of(name))
    }
}

/// The extent of a dataset's x values inside the window.
fn x_range(x: &h5::Dataset, n: usize, window: (Option<f64>, Option<f64>)) -> Result<(f64, f64)> {
    let first: Vec<f64> = x.read_slice_1d(0..1)?.to_vec();
    let last: Vec<f64> = x.read_slice_1d(n - 1..n)?.to_vec();
    let x0 = window.0.map_or(first[0], |f| f.max(first[0]));
    let x1 = window.1.map_or(last[0], |t| t.min(last[0]));
    // NaN ends (a corrupt time column) count as an empty window too.
    if x1.partial_cmp(&x0) != Some(std::cmp::Ordering::Greater) {
        bail!(
            "the window holds no samples: the data run from {} to {}",
            crate::eng::eng(first[0], "s"),
            crate::eng::eng(last[0], "s")
        );
    }
    Ok((x0, x1))
}

/// Reads `y` against `x` (both 1-D f64 datasets of equal length) into min/max buckets.
fn read_trace(
    file: &h5::File,
    x_name: &str,
    y_name: &str,
    window: (Option<f64>, Option<f64>),
) -> Result<Trace> {
    let x = file
        .dataset(x_name)
        .with_context(|| format!("no dataset {x_name:?}"))?;
    let y = file
        .dataset(y_name)
        .with_context(|| format!("no dataset {y_name:?}"))?;
    let n = x.size().min(y.size());
    if n == 0 {
        bail!("dataset {y_name:?} is empty");
    }
    let (x0, x1) = x_range(&x, n, window)?;
    let span = x1 - x0;
    let mut buckets: Vec<Option<(f64, f64)>> = vec![None; WIDTH as usize];
    let mut used = 0usize;
    let mut start = 0;
    while start < n {
        let end = (start + BLOCK).min(n);
        let xs = x.read_slice_1d::<f64, _>(start..end)?;
        let ys = y.read_slice_1d::<f64, _>(start..end)?;
        for (&xv, &yv) in xs.iter().zip(ys.iter()) {
            if !yv.is_finite() || xv < x0 || xv > x1 {
                continue;
            }
            used += 1;
            let b = (((xv - x0) / span) * f64::from(WIDTH - 1))
                .round()
                .clamp(0.0, f64::from(WIDTH - 1)) as usize;
            let slot = &mut buckets[b];
            *slot = Some(slot.map_or((yv, yv), |(lo, hi)| (lo.min(yv), hi.max(yv))));
        }
        start = end;
    }
    let buckets: Vec<(f64, f64, f64)> = buckets
        .iter()
        .enumerate()
        .filter_map(|(b, v)| {
            v.map(|(lo, hi)| (x0 + span * b as f64 / f64::from(WIDTH - 1), lo, hi))
        })
        .collect();
    if buckets.is_empty() {
        bail!("dataset {y_name:?} has no finite samples in the window");
    }
    let dense = used > BAND_SAMPLES_PER_BUCKET * buckets.len();
    Ok(Trace {
        unit: unit_of(&y),
        dense,
        buckets,
    })
}

/// Plots each panel's signal against `plot.x`, stacked, into an SVG file.
pub fn plot(h5_path: &Path, plot: &Plot<'_>, panels: &[Panel], out: &Path) -> Result<()> {
    let file = h5::File::open(h5_path).with_context(|| format!("opening {}", h5_path.display()))?;
    let x_unit = file
        .dataset(plot.x)
        .map(|d| unit_of(&d))
        .unwrap_or_default();
    let traces: Vec<Trace> = panels
        .iter()
        .map(|p| read_trace(&file, plot.x, &p.signal, plot.window))
        .collect::<Result<_>>()?;
    let height = PANEL_HEIGHT * traces.len().max(1) as u32 + 30;
    let root = SVGBackend::new(out, (WIDTH, height)).into_drawing_area();
    let draw = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        root.fill(&WHITE)?;
        let (top, body) = root.split_vertically(30);
        top.titled(plot.title, ("sans-serif", 18))?;
        // Waveforms are samples; the exact peaks of each cycle are in the cycle table
        // (a plot of the cycle table itself needs no such note).
        if !plot.x.starts_with("cycles/") {
            top.draw(&Text::new(
                "sampled; exact peaks in the cycle table",
                (WIDTH as i32 - 215, 20),
                ("sans-serif", 11)
                    .into_font()
                    .color(&RGBColor(90, 100, 110)),
            ))?;
        }
        let areas = body.split_evenly((traces.len(), 1));
        for ((trace, panel), area) in traces.iter().zip(panels).zip(areas) {
            draw_panel(&area, trace, panel, plot.x, &x_unit)?;
        }
        root.present()?;
        Ok(())
    };
    draw().map_err(|e| anyhow::anyhow!("drawing {}: {e}", out.display()))
}

/// Tick text with the decimals the tick spacing needs (about 10 ticks per axis).
fn tick_text(v: f64, span: f64) -> String {
    let step = span / 10.0;
    let decimals = if step > 0.0 && step.is_finite() {
        (-step.log10().floor()).clamp(0.0, 9.0) as usize
    } else {
        0
    };
    format!("{v:.decimals$}")
}

fn draw_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    t: &Trace,
    panel: &Panel,
    x: &str,
    x_unit: &str,
) -> std::result::Result<(), Box<dyn std::error::Error>>
where
    DB::ErrorType: 'static,
{
    let x0 = t.buckets.first().map_or(0.0, |b| b.0);
    let x1 = t.buckets.last().map_or(1.0, |b| b.0);
    let (xs, xu) = axis_unit(x, x_unit, x1 - x0);
    let mut lo = t.buckets.iter().map(|b| b.1).fold(f64::INFINITY, f64::min);
    let mut hi = t
        .buckets
        .iter()
        .map(|b| b.2)
        .fold(f64::NEG_INFINITY, f64::max);
    for m in &panel.markers {
        lo = lo.min(m.value);
        hi = hi.max(m.value);
    }
    let (ys, yu) = axis_unit(&panel.signal, &t.unit, lo.abs().max(hi.abs()));
    let (lo, hi) = (lo * ys, hi * ys);
    let pad = ((hi - lo) * 0.05).max(1e-9 * hi.abs().max(1.0));
    let (sx0, sx1) = (x0 * xs, (x1 * xs).max(x0 * xs + f64::MIN_POSITIVE));
    let mut chart = ChartBuilder::on(area)
        .margin(8)
        .x_label_area_size(32)
        .y_label_area_size(64)
        .build_cartesian_2d(sx0..sx1, (lo - pad)..(hi + pad))?;
    let (xspan, yspan) = (sx1 - sx0, hi - lo + 2.0 * pad);
    chart
        .configure_mesh()
        .x_desc(axis_desc(x, &xu))
        .y_desc(axis_desc(&panel.signal, &yu))
        .x_label_formatter(&|v| tick_text(*v, xspan))
        .y_label_formatter(&|v| tick_text(*v, yspan))
        .draw()?;
    // Our own colours: a deep teal trace, its min/max band a pale teal, limits brick.
    let teal = RGBColor(0, 110, 120);
    let scaled = |b: &(f64, f64, f64)| (b.0 * xs, b.1 * ys, b.2 * ys);
    let pts: Vec<(f64, f64, f64)> = t.buckets.iter().map(scaled).collect();
    if t.dense {
        let band: Vec<(f64, f64)> = pts
            .iter()
            .map(|p| (p.0, p.2))
            .chain(pts.iter().rev().map(|p| (p.0, p.1)))
            .collect();
        chart.draw_series(std::iter::once(Polygon::new(band, teal.mix(0.35).filled())))?;
    }
    chart.draw_series(LineSeries::new(pts.iter().map(|p| (p.0, p.2)), &teal))?;
    chart.draw_series(LineSeries::new(pts.iter().map(|p| (p.0, p.1)), &teal))?;
    let brick = RGBColor(170, 60, 40);
    for m in &panel.markers {
        let y = m.value * ys;
        chart.draw_series(DashedLineSeries::new(
            [(sx0, y), (sx1, y)],
            6,
            4,
            brick.stroke_width(1),
        ))?;
        chart.draw_series(std::iter::once(Text::new(
            m.label.clone(),
            (sx0 + 0.01 * xspan, y),
            ("sans-serif", 12).into_font().color(&brick),
        )))?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// One prefix per axis, chosen by the span (SI Brochure prefixes); ticks carry
    /// only the decimals their spacing needs, so a 20 µs window at 3 ms reads
    /// "2980 … 3000 µs" rather than "0.00298, 0.003, …".
    #[test]
    fn axes_read_in_engineering_units() {
        assert_eq!(axis_unit("time", "s", 10e-3), (1e3, "ms".to_string()));
        assert_eq!(axis_unit("time", "s", 20e-6), (1e6, "µs".to_string()));
        assert_eq!(
            axis_unit("cycles/duty", "1", 0.45),
            (100.0, "%".to_string())
        );
        assert_eq!(axis_desc("mag.i", "mA"), "magnetising current (mA)");
        assert_eq!(axis_desc("cycles/duty", "%"), "duty (%)");
        assert_eq!(tick_text(3.0, 10.0), "3");
        assert_eq!(tick_text(2985.0, 20.0), "2985");
        assert_eq!(tick_text(0.15, 0.2), "0.15");
    }
}
