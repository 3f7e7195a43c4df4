//! The closed-loop responses of `stepflux loop`: output impedance (dB re 1 Ω) and
//! line-to-output (dB), each magnitude above phase against log frequency; the
//! switching model's sampled-data curve solid, its injected response as circles at the
//! points injected, the averaged model's dashed, in the colours of the loop-gain plot
//! ([`super::bode_plot`]).

use std::path::Path;

use anyhow::Result;
use plotters::coord::Shift;
use plotters::prelude::*;

use super::frequency_panel::{legend, Models, Plotted};
use crate::check::eng;
use crate::loop_cmd::{Curves, InjectedCurves, LoopReport};

type Panel<'a> = DrawingArea<SVGBackend<'a>, Shift>;

/// One panel's curve of a model and its axis label.
struct Trace {
    label: &'static str,
    of: fn(&Curves) -> &[f64],
    injected: fn(&InjectedCurves) -> &[f64],
}

const TRACES: [Trace; 4] = [
    Trace {
        label: "|Zout| (dB re 1 Ω)",
        of: |c| &c.output_impedance_db,
        injected: |c| &c.output_impedance_db,
    },
    Trace {
        label: "phase of Zout (°)",
        of: |c| &c.output_impedance_deg,
        injected: |c| &c.output_impedance_deg,
    },
    Trace {
        label: "|vo/vin| (dB)",
        of: |c| &c.line_to_output_db,
        injected: |c| &c.line_to_output_db,
    },
    Trace {
        label: "phase of vo/vin (°)",
        of: |c| &c.line_to_output_deg,
        injected: |c| &c.line_to_output_deg,
    },
];

/// Writes the SVG: output impedance on the left, line-to-output on the right.
pub fn plot(r: &LoopReport, out: &Path) -> Result<()> {
    let root = SVGBackend::new(out, (1200, 700)).into_drawing_area();
    let draw = || -> Plotted {
        root.fill(&WHITE)?;
        let root = root.titled(
            &format!(
                "{}: closed-loop output impedance and line-to-output",
                r.scenario
            ),
            ("sans-serif", 18),
        )?;
        let panels = root.split_evenly((2, 2));
        // split_evenly runs row by row: Zout magnitude, line magnitude, Zout phase, ...
        for (panel, k) in panels.iter().zip([0, 2, 1, 3]) {
            draw_panel(panel, r, &TRACES[k], k == 0)?;
        }
        root.present()?;
        Ok(())
    };
    draw().map_err(|e| anyhow::anyhow!("drawing {}: {e}", out.display()))
}

fn draw_panel(area: &Panel, r: &LoopReport, t: &Trace, with_legend: bool) -> Plotted {
    let f = &r.frequency_hz;
    let (f0, f1) = (f[0], f[f.len() - 1]);
    let models = Models {
        sampled: r.sampled.as_ref().map(t.of),
        injected: r.injected.as_ref().map(t.injected),
        averaged: r.averaged.as_ref().map(t.of),
    };
    let (lo, hi) = match models.range() {
        (lo, hi) if lo.is_finite() && hi.is_finite() => (lo - 5.0, hi + 5.0),
        _ => (-1.0, 1.0),
    };
    let mut chart = ChartBuilder::on(area)
        .margin(12)
        .x_label_area_size(40)
        .y_label_area_size(60)
        .build_cartesian_2d((f0..f1).log_scale(), lo..hi)?;
    chart
        .configure_mesh()
        .x_desc("frequency (Hz)")
        .y_desc(t.label)
        .x_label_formatter(&|v| eng(*v, "Hz"))
        .draw()?;
    models.draw(&mut chart, f)?;
    if with_legend {
        legend(&mut chart, SeriesLabelPosition::LowerRight)?;
    }
    Ok(())
}
