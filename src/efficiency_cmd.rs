//! `stepflux efficiency SCENARIO --load A..B:N [--line V1,V2,…]`: the steady-state
//! efficiency of a scenario's converter across load and line, each point by shooting
//! ([`crate::settle_cmd::operating_point`]), in parallel.
//!
//! Each load point is the design's load replaced by a constant-current sink of that
//! current (so the output current is exactly the one asked for, under the controller
//! or open loop alike), at each line voltage. Writes `DIR/<name>-efficiency/`:
//! `efficiency.csv` and `efficiency.json` (SI units; power-stage efficiency P_out/P_in,
//! whole-converter efficiency P_out/(P_in + P_bias) with the scenario's fixed
//! `bias_power`, and the loss of every element), and `efficiency.svg`.

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};

use anyhow::{bail, Context, Result};
use rayon::prelude::*;
use serde::Serialize;

use crate::exit::{Exit, ExitWith, Failure};
use crate::job::Job;
use crate::scenario;
use crate::settle_cmd::{operating_point, OperatingPoint};
use crate::units::{self, Unit};
use crate::writers::efficiency_plot;

/// Output currents to visit: `A..B:N` (N points from A to B, evenly spaced) or one value.
pub fn parse_loads(text: &str) -> Result<Vec<f64>> {
    let (range, count) = match text.split_once(':') {
        Some((r, n)) => (
            r,
            n.trim().parse::<usize>().context("point count after ':'")?,
        ),
        None => (text, 1),
    };
    let (a, b) = match range.split_once("..") {
        Some((a, b)) => (
            units::parse(a.trim(), Unit::Ampere)?,
            units::parse(b.trim(), Unit::Ampere)?,
        ),
        None => {
            let a = units::parse(range.trim(), Unit::Ampere)?;
            (a, a)
        }
    };
    if !(a > 0.0 && b >= a) || count == 0 || (count == 1 && a != b) {
        bail!("--load {text:?}: expected A..B:N with 0 < A ≤ B and N ≥ 2, or one current");
    }
    Ok((0..count)
        .map(|k| match count {
            1 => a,
            _ => a + (b - a) * k as f64 / (count - 1) as f64,
        })
        .collect())
}

/// Input voltages: a comma-separated list.
pub fn parse_lines(text: &str) -> Result<Vec<f64>> {
    text.split(',')
        .map(|v| {
            let v = units::parse(v.trim(), Unit::Volt)?;
            if v > 0.0 {
                Ok(v)
            } else {
                bail!("--line: input voltages must be positive")
            }
        })
        .collect()
}

/// One (line, load) point: its operating point or why there is none.
#[derive(Clone, Debug, Serialize)]
pub struct Point {
    /// Input voltage, volts.
    pub line_v: f64,
    /// Output current, amperes.
    pub load_a: f64,
    /// The operating point, if a periodic steady state was found.
    pub point: Option<OperatingPoint>,
    /// Why not.
    pub error: Option<String>,
}

impl Point {
    fn get(&self, name: &str) -> Option<f64> {
        self.point.as_ref().and_then(|p| p.get(name))
    }
}

/// What the command was asked for.
pub struct EfficiencyArgs {
    /// Scenario file.
    pub scenario: PathBuf,
    /// `A..B:N`.
    pub load: String,
    /// Comma list; `None`: the scenario's input voltage.
    pub line: Option<String>,
    /// Output root.
    pub out: PathBuf,
    /// Points at once (0: one per core).
    pub jobs: usize,
}

/// Every point, in parallel (one per core, or `jobs`).
pub fn sweep(job: &Job, lines: &[f64], loads: &[f64], jobs: usize) -> Result<Vec<Point>> {
    let grid: Vec<(f64, f64)> = lines
        .iter()
        .flat_map(|&v| loads.iter().map(move |&i| (v, i)))
        .collect();
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(jobs)
        .build()
        .context("starting the worker pool")?;
    Ok(pool.install(|| {
        grid.par_iter()
            .map(
                |&(line_v, load_a)| match operating_point(&job.at_line_and_load(line_v, load_a)) {
                    Ok(p) => Point {
                        line_v,
                        load_a,
                        point: Some(p),
                        error: None,
                    },
                    Err(e) => Point {
                        line_v,
                        load_a,
                        point: None,
                        error: Some(format!("{e:#}")),
                    },
                },
            )
            .collect()
    }))
}

/// Fixed columns of the table, then one per loss figure.
const COLUMNS: [(&str, &str); 6] = [
    ("output_power_w", "power.out"),
    ("input_power_w", "power.in"),
    ("efficiency_stage", "efficiency.stage"),
    ("efficiency_with_bias", "efficiency.with_bias"),
    ("bias_power_w", "bias_power"),
    ("output_mean_v", "out.v.mean"),
];

/// The table as CSV: one row per point, SI units, empty cells where not found.
pub fn csv(points: &[Point]) -> String {
    let losses: BTreeSet<String> = points
        .iter()
        .filter_map(|p| p.point.as_ref())
        .flat_map(|p| p.measurements.iter().map(|f| f.key.clone()))
        .filter(|n| n.starts_with("loss."))
        .collect();
    let mut head = vec!["line_v".to_string(), "load_a".into()];
    head.extend(COLUMNS.iter().map(|c| c.0.to_string()));
    head.push("duty".into());
    head.extend(losses.iter().map(|l| format!("{}_w", l.replace('.', "_"))));
    head.push("error".into());
    let mut out = head.join(",") + "\n";
    for p in points {
        let cell = |v: Option<f64>| v.map_or(String::new(), |v| format!("{v:e}"));
        let mut row = vec![format!("{:e}", p.line_v), format!("{:e}", p.load_a)];
        row.extend(COLUMNS.iter().map(|c| cell(p.get(c.1))));
        row.push(cell(p.point.as_ref().map(|o| o.period.duty)));
        row.extend(losses.iter().map(|l| cell(p.get(l))));
        row.push(
            p.error
                .as_deref()
                .map_or(String::new(), |e| format!("\"{}\"", e.replace('"', "'"))),
        );
        out += &(row.join(",") + "\n");
    }
    out
}

/// The command.
pub fn efficiency(args: &EfficiencyArgs) -> Result<(), Failure> {
    let loaded = scenario::load(&args.scenario)
        .context("scenario is not valid")
        .exit_with(Exit::BadInput)?;
    let job = &loaded.job;
    let loads = parse_loads(&args.load).exit_with(Exit::BadInput)?;
    let lines = match &args.line {
        Some(l) => parse_lines(l).exit_with(Exit::BadInput)?,
        None => vec![job.design.input.voltage],
    };
    let points = sweep(job, &lines, &loads, args.jobs).exit_with(Exit::SimulationFailed)?;
    let dir = args.out.join(format!("{}-efficiency", job.name));
    write(&dir, job, &points).exit_with(Exit::SimulationFailed)?;
    print_table(&points, job.bias_power);
    println!("  table: {}", dir.join("efficiency.csv").display());
    println!("  plot:  {}", dir.join("efficiency.svg").display());
    if points.iter().any(|p| p.error.is_some()) {
        return Err(anyhow::anyhow!("some points have no periodic steady state"))
            .exit_with(Exit::SimulationFailed);
    }
    Ok(())
}

fn write(dir: &Path, job: &Job, points: &[Point]) -> Result<()> {
    std::fs::create_dir_all(dir).with_context(|| format!("creating {}", dir.display()))?;
    std::fs::write(dir.join("efficiency.csv"), csv(points))?;
    let json = serde_json::json!({
        "scenario": job.name,
        "bias_power_w": job.bias_power,
        "points": points,
    });
    std::fs::write(
        dir.join("efficiency.json"),
        serde_json::to_string_pretty(&json)?,
    )?;
    efficiency_plot::plot(points, job.bias_power, &dir.join("efficiency.svg"))
}

fn print_table(points: &[Point], bias: f64) {
    use crate::check::eng;
    println!(
        "{:>10} {:>10} {:>10} {:>8} {:>12}",
        "line", "load", "P out", "stage", "with bias"
    );
    for p in points {
        let pct = |v: Option<f64>| v.map_or("-".into(), |v| format!("{:.2} %", 100.0 * v));
        println!(
            "{:>10} {:>10} {:>10} {:>8} {:>12}{}",
            eng(p.line_v, "V"),
            eng(p.load_a, "A"),
            p.get("power.out").map_or("-".into(), |v| eng(v, "W")),
            pct(p.get("efficiency.stage")),
            pct(p.get("efficiency.with_bias")),
            p.error
                .as_deref()
                .map_or(String::new(), |e| format!("  error: {e}")),
        );
    }
    println!("  bias power {}", eng(bias, "W"));
}
