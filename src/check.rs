//! `stepflux check` (validate a scenario and print its paper design figures) and
//! `stepflux schema` (print the scenario format's JSON Schema).

use std::path::Path;

use anyhow::Context;
use serde_json::json;
use stepflux_models::figures::{DesignFigures, DesignPoint};

use crate::budget;
use crate::eng::percent;
use crate::exit::{Exit, ExitWith, Failure};
use crate::job::Drive;
use crate::scenario::{self, Loaded};

/// Validates the scenario at `path` and prints its figures, design failures and
/// warnings to stdout, as text or as one JSON object. A design that fails by its own
/// figures is a valid scenario with a failing answer: exit 1, like a run that fails a
/// limit, while the report is still printed.
/// Past the default run bounds it is bad input unless `allow_large`.
pub fn check(path: &Path, as_json: bool, allow_large: bool) -> Result<(), Failure> {
    let loaded = scenario::load(path)
        .context("scenario is not valid")
        .exit_with(Exit::BadInput)?;
    let cost = budget::enforce(&loaded, allow_large)
        .context("scenario is past the default run bounds")
        .exit_with(Exit::BadInput)?;
    if as_json {
        let mut report = report_json(&loaded);
        report["cost_estimate"] = json!(cost);
        let text = serde_json::to_string_pretty(&report)
            .context("formatting the report")
            .exit_with(Exit::SimulationFailed)?;
        println!("{text}");
    } else {
        print!("{}", report_text(&loaded));
        // Timed only for the text report: JSON output stays the same on every machine.
        println!("{}", cost.text(&budget::calibrate(&loaded)));
    }
    if loaded.failures.is_empty() {
        return Ok(());
    }
    Err(Failure {
        exit: Exit::SpecFailed,
        error: anyhow::anyhow!(
            "{}: the design fails by its paper figures ({} finding(s)); `stepflux run` \
             simulates it and shows how",
            path.display(),
            loaded.failures.len()
        ),
    })
}

/// Prints the JSON Schema of the scenario format.
pub fn schema() -> Result<(), Failure> {
    let text = serde_json::to_string_pretty(&scenario::json_schema())
        .context("formatting the schema")
        .exit_with(Exit::SimulationFailed)?;
    println!("{text}");
    Ok(())
}

fn drive_name(drive: &Drive) -> &'static str {
    match drive {
        Drive::OpenLoop(_) => "open_loop",
        Drive::Controller(_) => "controller",
    }
}

/// The check report as JSON: SI units; the design figures in the catalogue's
/// vocabulary (`design.flux_peak`, with its unit beside it), as in `summary.json`.
pub fn report_json(l: &Loaded) -> serde_json::Value {
    let p = l.job.design_point();
    json!({
        "name": l.job.name,
        "valid": true,
        "template": l.job.design.reset.name(),
        "drive": drive_name(&l.job.drive),
        "design_point": {
            "switching_frequency_hz": p.frequency,
            "max_duty": p.max_duty,
            "set_point_v": p.set_point,
            "nominal_line_v": l.job.design.input.voltage,
            "low_line_v": p.low_line,
            "high_line_v": p.high_line,
        },
        // The same figures, keys and units as `summary.json`'s "design".
        "figures": crate::writers::figure_json::Figures(&l.figures.figures()),
        "ratings": {
            "saturation_flux_density": l.job.design.transformer.saturation_flux_density,
            "switch_voltage_rating": l.job.design.switch.voltage_rating,
        },
        "sample_interval_s": {
            "requested": l.job.analysis.sample_interval,
            "on_time_grid": l.job.sample_interval_on_grid().map(|g| g.0),
            "tick": l.job.sample_interval_on_grid().map(|g| g.1),
        },
        "signals": l.probes,
        "design_passes": l.failures.is_empty(),
        "design_failures": l.failures.iter().map(|w| json!({"field": w.field, "message": w.message})).collect::<Vec<_>>(),
        "states": l.states.iter().map(|n| json!({"name": n.name, "kind": n.class.describe(), "unit": n.class.unit()})).collect::<Vec<_>>(),
        "warnings": l.warnings.iter().map(|w| json!({"field": w.field, "message": w.message})).collect::<Vec<_>>(),
    })
}

/// The check report as aligned text.
pub fn report_text(l: &Loaded) -> String {
    let p = l.job.design_point();
    let d = &l.job.design;
    let mut out = format!(
        "{}: valid ({} template, {} drive)\n",
        l.job.name,
        d.reset.name(),
        drive_name(&l.job.drive)
    );
    for (label, value) in figure_lines(&l.figures, &p, d) {
        out.push_str(&format!("  {label:<44} {value}\n"));
    }
    let requested = l.job.analysis.sample_interval;
    if let Some((actual, tick)) = l.job.sample_interval_on_grid() {
        // The grid's tick is a few picoseconds, so only ten figures show the rounding.
        let value = match actual == requested {
            true => format!("{}, on the time grid", eng(requested, "s")),
            false => format!(
                "{} requested, {} shorter on the time grid (tick {})",
                eng(requested, "s"),
                eng(requested - actual, "s"),
                eng(tick, "s")
            ),
        };
        out.push_str(&format!("  {:<44} {value}\n", "sample interval"));
    }
    out.push_str(&format!("  signals: {}\n", l.probes.join(", ")));
    if l.failures.is_empty() {
        out.push_str("design: PASS by its paper figures\n");
    } else {
        out.push_str(&format!(
            "design: FAIL ({} finding(s)):\n",
            l.failures.len()
        ));
        for w in &l.failures {
            out.push_str(&format!("  fails: {w}\n"));
        }
    }
    out.push_str(&format!(
        "  states (for analysis.start.values): {}\n",
        stepflux_models::steady::names::describe_all(&l.states)
    ));
    if l.warnings.is_empty() {
        out.push_str("no warnings\n");
    } else {
        out.push_str(&format!("{} warning(s):\n", l.warnings.len()));
        for w in &l.warnings {
            out.push_str(&format!("  warning: {w}\n"));
        }
    }
    out.push_str(crate::summary::CAUTION);
    out.push('\n');
    out
}

fn figure_lines(
    f: &DesignFigures,
    p: &DesignPoint,
    d: &stepflux_models::template::ForwardDesign,
) -> Vec<(String, String)> {
    let vin = d.input.voltage;
    let bsat = d.transformer.saturation_flux_density;
    let mut lines = vec![
        ("turns ratio Ns/Np".to_string(), eng(f.secondary_ratio, "1")),
        ("switching frequency".into(), eng(p.frequency, "Hz")),
        (
            "line: nominal / low / high".into(),
            format!(
                "{} / {} / {}",
                eng(vin, "V"),
                eng(p.low_line, "V"),
                eng(p.high_line, "V")
            ),
        ),
        (
            match p.set_point {
                Some(_) => "output voltage (set point)".into(),
                None => "output voltage (fixed duty, nominal line)".into(),
            },
            eng(f.output_voltage, "V"),
        ),
        ("load current".into(), eng(f.load_current, "A")),
        (
            format!("duty at nominal line {}", eng(vin, "V")),
            percent(f.nominal_duty),
        ),
    ];
    if let Some(r) = f.reset_ratio {
        lines.insert(1, ("turns ratio Nr/Np".into(), eng(r, "1")));
    }
    if let Some(needed) = f.low_line_duty_needed {
        lines.push((
            format!("duty needed at low line {}", eng(p.low_line, "V")),
            percent(needed),
        ));
    }
    lines.push(("maximum duty".into(), percent(p.max_duty)));
    lines.push((
        "reset-limit duty".into(),
        f.reset_limit_duty
            .map_or("none below 100 %".into(), percent),
    ));
    lines.push((
        "magnetising peak (max duty, low line)".into(),
        eng(f.magnetising_peak, "A"),
    ));
    lines.push((
        "flux density peak (max duty, low line)".into(),
        format!(
            "{} ({:.0} % of Bsat {})",
            eng(f.flux_peak, "T"),
            100.0 * f.flux_peak / bsat,
            eng(bsat, "T")
        ),
    ));
    lines.push((
        "inductor ripple (nominal line)".into(),
        format!("{} p-p", eng(f.inductor_ripple, "A")),
    ));
    lines.push((
        "output ripple (nominal line)".into(),
        format!("{} p-p", eng(f.output_ripple, "V")),
    ));
    if let Some(vc) = f.clamp_voltage {
        lines.push((
            "clamp voltage above input (worst line)".into(),
            eng(vc, "V"),
        ));
    }
    lines.push((
        "drain stress (worst line)".into(),
        format!(
            "{} (rating {})",
            eng(f.drain_stress, "V"),
            eng(d.switch.voltage_rating, "V")
        ),
    ));
    lines
}

/// Engineering notation, shared with every person-facing output (see [`crate::eng`]).
pub use crate::eng::eng;
