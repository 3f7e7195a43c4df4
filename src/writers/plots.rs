//! SVG plots read back from a waveform file. Long signals are reduced to the minimum
//! and maximum of each pixel column while reading in blocks, so a plot of a long run
//! keeps every peak yet needs memory only for the picture.

use std::path::Path;

use anyhow::{bail, Context, Result};
use hdf5_metno as h5;
use plotters::prelude::*;

/// Horizontal resolution of a plot, pixels; also the number of min/max buckets.
const WIDTH: u32 = 1000;
/// Height of one panel, pixels.
const PANEL_HEIGHT: u32 = 280;
/// Samples read per block.
const BLOCK: usize = 65_536;

/// One trace: per-bucket (x, min, max).
struct Trace {
    name: String,
    unit: String,
    buckets: Vec<(f64, f64, f64)>,
}

fn unit_of(ds: &h5::Dataset) -> String {
    ds.attr("unit")
        .and_then(|a| a.read_scalar::<h5::types::VarLenUnicode>())
        .map(|u| u.as_str().to_string())
        .unwrap_or_default()
}

/// Reads `y` against `x` (both 1-D f64 datasets of equal length) into min/max buckets.
fn read_trace(file: &h5::File, x_name: &str, y_name: &str) -> Result<Trace> {
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
    let first: Vec<f64> = x.read_slice_1d(0..1)?.to_vec();
    let last: Vec<f64> = x.read_slice_1d(n - 1..n)?.to_vec();
    let (x0, x1) = (first[0], last[0]);
    let span = (x1 - x0).max(f64::MIN_POSITIVE);
    let mut buckets: Vec<Option<(f64, f64)>> = vec![None; WIDTH as usize];
    let mut start = 0;
    while start < n {
        let end = (start + BLOCK).min(n);
        let xs = x.read_slice_1d::<f64, _>(start..end)?;
        let ys = y.read_slice_1d::<f64, _>(start..end)?;
        for (&xv, &yv) in xs.iter().zip(ys.iter()) {
            if !yv.is_finite() {
                continue;
            }
            let b = (((xv - x0) / span) * f64::from(WIDTH - 1))
                .round()
                .clamp(0.0, f64::from(WIDTH - 1)) as usize;
            let slot = &mut buckets[b];
            *slot = Some(slot.map_or((yv, yv), |(lo, hi)| (lo.min(yv), hi.max(yv))));
        }
        start = end;
    }
    let buckets = buckets
        .iter()
        .enumerate()
        .filter_map(|(b, v)| {
            v.map(|(lo, hi)| (x0 + span * b as f64 / f64::from(WIDTH - 1), lo, hi))
        })
        .collect();
    Ok(Trace {
        name: y_name.to_string(),
        unit: unit_of(&y),
        buckets,
    })
}

/// Plots each of `signals` against `x` in its own panel, stacked, into an SVG file.
pub fn plot(h5_path: &Path, x: &str, signals: &[&str], title: &str, out: &Path) -> Result<()> {
    let file = h5::File::open(h5_path).with_context(|| format!("opening {}", h5_path.display()))?;
    let x_unit = file.dataset(x).map(|d| unit_of(&d)).unwrap_or_default();
    let traces: Vec<Trace> = signals
        .iter()
        .map(|s| read_trace(&file, x, s))
        .collect::<Result<_>>()?;
    let height = PANEL_HEIGHT * traces.len().max(1) as u32 + 30;
    let root = SVGBackend::new(out, (WIDTH, height)).into_drawing_area();
    let draw = || -> std::result::Result<(), Box<dyn std::error::Error>> {
        root.fill(&WHITE)?;
        let (top, body) = root.split_vertically(30);
        top.titled(title, ("sans-serif", 18))?;
        for (trace, area) in traces.iter().zip(body.split_evenly((traces.len(), 1))) {
            panel(&area, trace, x, &x_unit)?;
        }
        root.present()?;
        Ok(())
    };
    draw().map_err(|e| anyhow::anyhow!("drawing {}: {e}", out.display()))
}

fn panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    t: &Trace,
    x: &str,
    x_unit: &str,
) -> std::result::Result<(), Box<dyn std::error::Error>>
where
    DB::ErrorType: 'static,
{
    let x0 = t.buckets.first().map_or(0.0, |b| b.0);
    let x1 = t
        .buckets
        .last()
        .map_or(1.0, |b| b.0)
        .max(x0 + f64::MIN_POSITIVE);
    let lo = t.buckets.iter().map(|b| b.1).fold(f64::INFINITY, f64::min);
    let hi = t
        .buckets
        .iter()
        .map(|b| b.2)
        .fold(f64::NEG_INFINITY, f64::max);
    let pad = ((hi - lo) * 0.05).max(1e-9);
    let mut chart = ChartBuilder::on(area)
        .margin(8)
        .x_label_area_size(32)
        .y_label_area_size(64)
        .build_cartesian_2d(x0..x1, (lo - pad)..(hi + pad))?;
    chart
        .configure_mesh()
        .x_desc(format!("{x} ({x_unit})"))
        .y_desc(format!("{} ({})", t.name, t.unit))
        .draw()?;
    // Our own colours: a deep teal envelope for the min/max band, drawn as a line
    // through the maxima and one through the minima.
    let teal = RGBColor(0, 110, 120);
    chart.draw_series(LineSeries::new(t.buckets.iter().map(|b| (b.0, b.2)), &teal))?;
    chart.draw_series(LineSeries::new(t.buckets.iter().map(|b| (b.0, b.1)), &teal))?;
    Ok(())
}
