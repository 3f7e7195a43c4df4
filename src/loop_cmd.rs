//! `stepflux loop SCENARIO [--method sampled|injected|both] [--points N] [--from F]
//! [--to F] [--json]`: the loop gain of a scenario's controller at its steady operating
//! point from the switching model, by its sampled-data linearisation and/or by
//! sinusoidal injection into the switching simulation ([`stepflux_models::loopgain`];
//! injected frequencies run in parallel here, the models crate stays single-threaded),
//! and beside them from the state-space-averaged model ([`stepflux_models::averaged`])
//! of the same design and compensator. The loop is broken at the modulator's control
//! input. With injection the grid is moved to frequencies commensurate with the
//! switching period ([`stepflux_models::loopgain::commensurate`]) and every model is
//! evaluated there.
//!
//! Beside the loop gain, each model gives the closed loop's control-to-output, output
//! impedance (dB re 1 Ω) and line-to-output at the same steady state.
//!
//! Writes `DIR/<name>-loop/`: `loop.csv` and `loop.json` (SI units, degrees and dB) and
//! `loop.svg` (Bode plot of the loop gain), `closed-loop.svg` (output impedance and
//! line-to-output), and prints crossover and margins.

use std::path::{Path, PathBuf};

use anyhow::{anyhow, bail, Context, Result};
use nalgebra::Complex;
use rayon::prelude::*;
use serde::Serialize;
use stepflux_models::averaged::AveragedModel;
use stepflux_models::controller::ControllerSpec;
use stepflux_models::loopgain::{
    commensurate, inject, inject_input, log_grid, loop_map, margins, margins_on_grid,
    sampled_model, Bode, Disturbed, InjectionOptions, InjectionPoint, InputInjection,
    LinearOptions, Margins, SampledModel,
};
use stepflux_models::steady::SteadyState;

use crate::check::eng;
use crate::exit::{Exit, ExitWith, Failure};
use crate::job::{Drive, Job};
use crate::scenario;
use crate::units::{self, Unit};
use crate::writers::{bode_plot, response_plot};

/// Which switching-model methods to run.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum Method {
    /// The sampled-data linearisation of the period map (fast).
    #[value(alias = "a")]
    Sampled,
    /// Sinusoidal injection into the switching simulation.
    #[value(alias = "b")]
    Injected,
    /// Both, side by side.
    Both,
}

impl Method {
    fn sampled(self) -> bool {
        self != Method::Injected
    }
    fn injected(self) -> bool {
        self != Method::Sampled
    }
}

/// What the command was asked for.
pub struct LoopArgs {
    /// Switching-model methods.
    pub method: Method,
    /// Scenario file.
    pub scenario: PathBuf,
    /// Frequencies on the grid.
    pub points: usize,
    /// Lowest frequency (default fs/1000).
    pub from: Option<String>,
    /// Highest frequency (default fs/2).
    pub to: Option<String>,
    /// Print JSON instead of text.
    pub json: bool,
    /// Output root.
    pub out: PathBuf,
}

/// Crossover and margins in the report's units.
#[derive(Clone, Copy, Debug, Serialize)]
pub struct MarginReport {
    /// Hertz.
    pub crossover_hz: Option<f64>,
    /// Degrees.
    pub phase_margin_deg: Option<f64>,
    /// Where the phase is −180°, hertz.
    pub phase_crossover_hz: Option<f64>,
    /// dB.
    pub gain_margin_db: Option<f64>,
}

impl From<Margins> for MarginReport {
    fn from(m: Margins) -> Self {
        MarginReport {
            crossover_hz: m.crossover,
            phase_margin_deg: m.phase_margin,
            phase_crossover_hz: m.phase_crossover,
            gain_margin_db: m.gain_margin,
        }
    }
}

/// One model's curves on the grid: magnitude in dB, phase in degrees (unwrapped
/// from the lowest frequency).
#[derive(Clone, Debug, Serialize)]
pub struct Curves {
    /// Loop gain magnitude, dB.
    pub loop_gain_db: Vec<f64>,
    /// Loop gain phase, degrees.
    pub loop_gain_deg: Vec<f64>,
    /// Control-to-output magnitude, dB (volts of output per volt at the modulator).
    pub control_to_output_db: Vec<f64>,
    /// Control-to-output phase, degrees.
    pub control_to_output_deg: Vec<f64>,
    /// Closed-loop output impedance magnitude, dB re 1 Ω.
    pub output_impedance_db: Vec<f64>,
    /// Closed-loop output impedance phase, degrees.
    pub output_impedance_deg: Vec<f64>,
    /// Closed-loop line-to-output magnitude, dB (volts of output per volt of input).
    pub line_to_output_db: Vec<f64>,
    /// Closed-loop line-to-output phase, degrees.
    pub line_to_output_deg: Vec<f64>,
    /// Crossover and margins.
    pub margins: MarginReport,
}

/// The injected response on the grid.
#[derive(Clone, Debug, Serialize)]
pub struct InjectedCurves {
    /// Loop gain magnitude, dB.
    pub loop_gain_db: Vec<f64>,
    /// Loop gain phase, degrees (unwrapped from the lowest frequency).
    pub loop_gain_deg: Vec<f64>,
    /// Injection amplitude the linearity search settled on, volts.
    pub amplitude_v: Vec<f64>,
    /// Closed-loop output impedance by a sinusoidal load current, dB re 1 Ω.
    pub output_impedance_db: Vec<f64>,
    /// Its phase, degrees.
    pub output_impedance_deg: Vec<f64>,
    /// Closed-loop line-to-output by a sinusoidal input voltage, dB.
    pub line_to_output_db: Vec<f64>,
    /// Its phase, degrees.
    pub line_to_output_deg: Vec<f64>,
    /// Switching periods simulated, all frequencies, amplitudes and inputs.
    pub periods: usize,
    /// Crossover and margins, interpolated between grid points.
    pub margins: MarginReport,
}

/// The whole result.
#[derive(Clone, Debug, Serialize)]
pub struct LoopReport {
    /// Scenario name.
    pub scenario: String,
    /// Switching frequency, hertz.
    pub switching_frequency_hz: f64,
    /// Steady duty of the switching model.
    pub duty: f64,
    /// Where the loop is broken.
    pub break_point: &'static str,
    /// Frequencies, hertz.
    pub frequency_hz: Vec<f64>,
    /// The switching model's sampled-data linearisation (None: not asked for).
    pub sampled: Option<Curves>,
    /// The switching model by injection (None: not asked for).
    pub injected: Option<InjectedCurves>,
    /// The averaged model, if it applies to the design (None: why not in `averaged_error`).
    pub averaged: Option<Curves>,
    /// Why there is no averaged model.
    pub averaged_error: Option<String>,
}

const BREAK_POINT: &str = "in series at the modulator's control input, between the error \
amplifier output and the PWM comparator; T = -v_c/v_m";

fn unwrap_deg(values: impl Iterator<Item = Complex<f64>>) -> Vec<f64> {
    let mut out: Vec<f64> = Vec::new();
    for c in values {
        let p = c.arg().to_degrees();
        let q = match out.last() {
            Some(&prev) => p + 360.0 * ((prev - p) / 360.0).round(),
            None => p,
        };
        out.push(q);
    }
    out
}

fn curves(bode: &Bode, m: Margins) -> Curves {
    let db = |c: Complex<f64>| 20.0 * c.norm().log10();
    Curves {
        loop_gain_db: bode.iter().map(|p| db(p.loop_gain)).collect(),
        loop_gain_deg: unwrap_deg(bode.iter().map(|p| p.loop_gain)),
        control_to_output_db: bode.iter().map(|p| db(p.control_to_output)).collect(),
        control_to_output_deg: unwrap_deg(bode.iter().map(|p| p.control_to_output)),
        output_impedance_db: bode.iter().map(|p| db(p.output_impedance)).collect(),
        output_impedance_deg: unwrap_deg(bode.iter().map(|p| p.output_impedance)),
        line_to_output_db: bode.iter().map(|p| db(p.line_to_output)).collect(),
        line_to_output_deg: unwrap_deg(bode.iter().map(|p| p.line_to_output)),
        margins: m.into(),
    }
}

fn range(args: &LoopArgs, fs: f64) -> Result<(f64, f64)> {
    let parse = |t: &Option<String>, default: f64| match t {
        Some(t) => units::parse(t.trim(), Unit::Hertz),
        None => Ok(default),
    };
    let (lo, hi) = (parse(&args.from, fs / 1000.0)?, parse(&args.to, fs / 2.0)?);
    if !(lo > 0.0 && hi > lo && hi <= fs / 2.0 * (1.0 + 1e-9)) {
        bail!(
            "--from {} --to {}: expected 0 < from < to ≤ fs/2 = {}",
            eng(lo, "Hz"),
            eng(hi, "Hz"),
            eng(fs / 2.0, "Hz")
        );
    }
    if args.points < 2 {
        bail!("--points {}: at least 2", args.points);
    }
    Ok((lo, hi))
}

fn sampled(m: &SampledModel, grid: &[f64], lo: f64, hi: f64) -> Result<Curves> {
    let bode = m.bode(grid)?;
    let mg = margins(lo, hi, |f| Ok(m.at(f)?.loop_gain))?;
    Ok(curves(&bode, mg))
}

/// The grid moved to commensurate frequencies, duplicates dropped.
fn commensurate_grid(grid: &[f64], fs: f64) -> Vec<f64> {
    let opts = InjectionOptions::default();
    let mut out: Vec<f64> = grid
        .iter()
        .map(|&f| {
            let (m, n) = commensurate(f, fs, opts.short_window);
            m as f64 * fs / n as f64
        })
        .collect();
    out.dedup_by(|a, b| (*a / *b - 1.0).abs() < 1e-12);
    out
}

/// Each frequency on its own closed loop, in parallel (one map per worker).
fn injected(
    job: &Job,
    spec: &ControllerSpec,
    steady: &SteadyState,
    grid: &[f64],
) -> Result<InjectedCurves> {
    let opts = InjectionOptions::default();
    type Point = (InjectionPoint, InputInjection, InputInjection);
    let points: Vec<Point> = grid
        .par_iter()
        .map_init(
            || loop_map(&job.design, spec),
            |map, &f| -> Result<Point> {
                let map = map.as_mut().map_err(|e| anyhow!("{e}"))?;
                let input = |i| inject_input(&job.design, spec, steady, i, f, &opts);
                Ok((
                    inject(map, spec, steady, f, &opts)?,
                    input(Disturbed::LoadCurrent)?,
                    input(Disturbed::Line)?,
                ))
            },
        )
        .zip(grid)
        .map(|(p, f)| p.with_context(|| format!("injecting at {}", eng(*f, "Hz"))))
        .collect::<Result<_>>()?;
    let t: Vec<(f64, Complex<f64>)> = points
        .iter()
        .map(|p| (p.0.frequency, p.0.loop_gain))
        .collect();
    let db = |c: Complex<f64>| 20.0 * c.norm().log10();
    let z = || points.iter().map(|p| p.1.response);
    let l = || points.iter().map(|p| p.2.response);
    Ok(InjectedCurves {
        loop_gain_db: t.iter().map(|(_, c)| db(*c)).collect(),
        loop_gain_deg: unwrap_deg(t.iter().map(|(_, c)| *c)),
        amplitude_v: points.iter().map(|p| p.0.amplitude).collect(),
        output_impedance_db: z().map(db).collect(),
        output_impedance_deg: unwrap_deg(z()),
        line_to_output_db: l().map(db).collect(),
        line_to_output_deg: unwrap_deg(l()),
        periods: points
            .iter()
            .map(|p| p.0.periods + p.1.periods + p.2.periods)
            .sum(),
        margins: margins_on_grid(&t).into(),
    })
}

fn averaged(job: &Job, grid: &[f64], lo: f64, hi: f64) -> Result<Curves> {
    let Drive::Controller(spec) = &job.drive else {
        bail!("no controller");
    };
    let avg = AveragedModel::new(&job.design, spec)?;
    let bode = avg.bode(grid)?;
    let mg = margins(lo, hi, |f| avg.loop_gain(f))?;
    Ok(curves(&bode, mg))
}

/// Both models on the grid of `args`.
pub fn analyse(job: &Job, args: &LoopArgs) -> Result<LoopReport, Failure> {
    let Drive::Controller(spec) = &job.drive else {
        return Err(anyhow!(
            "the loop gain needs a controller; scenario '{}' runs open loop",
            job.name
        ))
        .exit_with(Exit::BadInput);
    };
    let fs = spec.oscillator.frequency;
    let (lo, hi) = range(args, fs).exit_with(Exit::BadInput)?;
    let mut grid = log_grid(lo, hi, args.points);
    if args.method.injected() {
        grid = commensurate_grid(&grid, fs);
    }
    let (steady, m) = sampled_model(&job.design, spec, &LinearOptions::default())
        .map_err(|e| anyhow!(e))
        .context("linearising the period map at the steady state")
        .exit_with(Exit::SimulationFailed)?;
    let sampled = match args.method.sampled() {
        true => Some(sampled(&m, &grid, lo, hi).exit_with(Exit::SimulationFailed)?),
        false => None,
    };
    let injected = match args.method.injected() {
        true => Some(injected(job, spec, &steady, &grid).exit_with(Exit::SimulationFailed)?),
        false => None,
    };
    let (averaged, averaged_error) = match averaged(job, &grid, lo, hi) {
        Ok(c) => (Some(c), None),
        Err(e) => (None, Some(format!("{e:#}"))),
    };
    Ok(LoopReport {
        scenario: job.name.clone(),
        switching_frequency_hz: fs,
        duty: m.duty,
        break_point: BREAK_POINT,
        frequency_hz: grid,
        sampled,
        injected,
        averaged,
        averaged_error,
    })
}

/// The command.
pub fn run(args: &LoopArgs) -> Result<(), Failure> {
    let loaded = scenario::load(&args.scenario)
        .context("scenario is not valid")
        .exit_with(Exit::BadInput)?;
    let report = analyse(&loaded.job, args)?;
    let dir = args.out.join(format!("{}-loop", report.scenario));
    write(&dir, &report).exit_with(Exit::SimulationFailed)?;
    if args.json {
        let text = serde_json::to_string_pretty(&report)
            .context("formatting the report")
            .exit_with(Exit::SimulationFailed)?;
        println!("{text}");
    } else {
        print!("{}", report_text(&report));
        println!("  table: {}", dir.join("loop.csv").display());
        println!("  plot:  {}", dir.join("loop.svg").display());
        println!("  closed loop: {}", dir.join("closed-loop.svg").display());
    }
    Ok(())
}

fn write(dir: &Path, r: &LoopReport) -> Result<()> {
    std::fs::create_dir_all(dir).with_context(|| format!("creating {}", dir.display()))?;
    std::fs::write(dir.join("loop.csv"), csv(r))?;
    std::fs::write(dir.join("loop.json"), serde_json::to_string_pretty(r)?)?;
    bode_plot::plot(r, &dir.join("loop.svg"))?;
    response_plot::plot(r, &dir.join("closed-loop.svg"))
}

/// One row per frequency, SI units; empty cells for a model not run or not available.
pub fn csv(r: &LoopReport) -> String {
    let mut out = String::from(
        "frequency_hz,sampled_loop_gain_db,sampled_loop_gain_deg,\
         sampled_control_to_output_db,sampled_control_to_output_deg,\
         sampled_output_impedance_db,sampled_output_impedance_deg,\
         sampled_line_to_output_db,sampled_line_to_output_deg,\
         injected_loop_gain_db,injected_loop_gain_deg,injected_amplitude_v,\
         injected_output_impedance_db,injected_output_impedance_deg,\
         injected_line_to_output_db,injected_line_to_output_deg,\
         averaged_loop_gain_db,averaged_loop_gain_deg,\
         averaged_control_to_output_db,averaged_control_to_output_deg,\
         averaged_output_impedance_db,averaged_output_impedance_deg,\
         averaged_line_to_output_db,averaged_line_to_output_deg\n",
    );
    let join = |v: &[f64]| {
        v.iter()
            .map(|v| format!("{v:e}"))
            .collect::<Vec<_>>()
            .join(",")
    };
    let cells = |c: Option<&Curves>, k: usize| match c {
        Some(c) => join(&[
            c.loop_gain_db[k],
            c.loop_gain_deg[k],
            c.control_to_output_db[k],
            c.control_to_output_deg[k],
            c.output_impedance_db[k],
            c.output_impedance_deg[k],
            c.line_to_output_db[k],
            c.line_to_output_deg[k],
        ]),
        None => ",,,,,,,".into(),
    };
    let injected = |c: Option<&InjectedCurves>, k: usize| match c {
        Some(c) => join(&[
            c.loop_gain_db[k],
            c.loop_gain_deg[k],
            c.amplitude_v[k],
            c.output_impedance_db[k],
            c.output_impedance_deg[k],
            c.line_to_output_db[k],
            c.line_to_output_deg[k],
        ]),
        None => ",,,,,,".into(),
    };
    for (k, f) in r.frequency_hz.iter().enumerate() {
        out += &format!(
            "{f:e},{},{},{}\n",
            cells(r.sampled.as_ref(), k),
            injected(r.injected.as_ref(), k),
            cells(r.averaged.as_ref(), k)
        );
    }
    out
}

fn margin_line(label: &str, m: &MarginReport) -> String {
    let opt = |v: Option<f64>, f: &dyn Fn(f64) -> String| v.map_or("-".to_string(), f);
    format!(
        "  {label:<9} crossover {:>10}  phase margin {:>7}  gain margin {:>8} (at {})\n",
        opt(m.crossover_hz, &|v| eng(v, "Hz")),
        opt(m.phase_margin_deg, &|v| format!("{v:.1}°")),
        opt(m.gain_margin_db, &|v| format!("{v:.1} dB")),
        opt(m.phase_crossover_hz, &|v| eng(v, "Hz")),
    )
}

/// Crossover and margins of both models for people.
pub fn report_text(r: &LoopReport) -> String {
    let mut out = format!(
        "{}: loop gain at the steady state (duty {:.4}), {} switching, broken {}\n",
        r.scenario,
        r.duty,
        eng(r.switching_frequency_hz, "Hz"),
        "at the modulator's control input"
    );
    if let Some(c) = &r.sampled {
        out += &margin_line("sampled", &c.margins);
    }
    if let Some(c) = &r.injected {
        out += &margin_line("injected", &c.margins);
    }
    match (&r.averaged, &r.averaged_error) {
        (Some(a), _) => out += &margin_line("averaged", &a.margins),
        (None, Some(e)) => out += &format!("  averaged  not available: {e}\n"),
        (None, None) => {}
    }
    if let Some(c) = &r.sampled {
        out += &peak_line(&r.frequency_hz, &c.output_impedance_db);
    }
    out
}

/// The largest closed-loop output impedance on the grid, for people.
fn peak_line(f: &[f64], z_db: &[f64]) -> String {
    let peak = f
        .iter()
        .zip(z_db)
        .filter(|(_, z)| z.is_finite())
        .max_by(|a, b| a.1.total_cmp(b.1));
    match peak {
        Some((f, z)) => format!(
            "  sampled   peak output impedance {} at {} (on the grid)\n",
            eng(10f64.powf(z / 20.0), "Ω"),
            eng(*f, "Hz")
        ),
        None => String::new(),
    }
}
