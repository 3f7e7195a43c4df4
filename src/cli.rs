//! Command-line surface. Parsing only; behaviour lives in the command modules.

use std::path::PathBuf;

use clap::{Parser, Subcommand};

use crate::batch::{Shard, Waveforms};

#[derive(Debug, Parser)]
#[command(
    name = "stepflux",
    version,
    about = "Cycle-by-cycle time-domain simulator for forward converters and their PWM control loops"
)]
// The exit-code paragraphs of `--help` are added at parse time from `exit` (see
// [`Cli::parse_args`]), so they cannot drift from the codes the process returns: no
// help text below writes a code.
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

impl Cli {
    /// Parses the process arguments with the exit-code line from [`crate::exit::Exit`]
    /// under `--help`, and each command's own exit codes from [`crate::exit::OUTCOMES`]
    /// under its `--help`. Usage errors exit 2 and `--help` 0, as clap does, which match
    /// `Exit::BadInput` and `Exit::Ok`.
    pub fn parse_args() -> Cli {
        use clap::{CommandFactory, FromArgMatches};
        let mut command = Cli::command().after_help(crate::exit::Exit::help_line());
        for (name, outcomes) in crate::exit::OUTCOMES {
            command = command.mut_subcommand(*name, |sub| {
                let text = sub.get_after_help().map(|t| t.to_string());
                let codes = crate::exit::command_help(outcomes);
                sub.after_help(match text {
                    Some(t) => format!("{t}\n\n{codes}"),
                    None => codes,
                })
            });
        }
        let matches = command.get_matches();
        Cli::from_arg_matches(&matches).unwrap_or_else(|e| e.exit())
    }
}

#[derive(Debug, Subcommand)]
pub enum Command {
    /// Run the built-in demonstration and write its waveforms.
    #[command(after_help = "Example:\n  stepflux demo --out results\n\n\
        Writes results/demo/waveforms.h5 with one dataset per signal; each \
        dataset carries a `unit` attribute.")]
    Demo {
        /// Directory that receives the `demo/` results folder.
        #[arg(long, value_name = "DIR", default_value = "out")]
        out: PathBuf,
    },
    /// Validate a scenario file and print its paper design figures and warnings.
    #[command(
        after_help = "Example:\n  stepflux check scenarios/demo-startup.json\n  \
        stepflux check --json scenarios/rcd-clamp.json > figures.json\n\n\
        Prints the design's paper figures, its warnings and the run's cost estimate."
    )]
    Check {
        /// Scenario file (JSON; see `stepflux schema`).
        #[arg(value_name = "SCENARIO")]
        scenario: PathBuf,
        /// Print one JSON object instead of text.
        #[arg(long)]
        json: bool,
        /// Accept a run past the default cost bounds (periods, output size, sample interval).
        #[arg(long)]
        allow_large: bool,
    },
    /// Find the periodic steady state of a scenario and print its operating point.
    #[command(
        after_help = "Example:\n  stepflux settle scenarios/demo-startup.json\n  \
        stepflux settle --json scenarios/rcd-clamp.json > point.json\n\n\
        The steady state of the initial operating point (disturbances ignored, soft starts \
        over) by shooting: every state by name, output mean and ripple, duty, efficiency \
        and losses, reset margin, flux and drain peaks."
    )]
    Settle {
        /// Scenario file (JSON; see `stepflux schema`).
        #[arg(value_name = "SCENARIO")]
        scenario: PathBuf,
        /// Print one JSON object (SI units) instead of text.
        #[arg(long)]
        json: bool,
    },
    /// Steady-state efficiency across load and line, with the loss of every element.
    #[command(
        after_help = "Example:\n  stepflux efficiency scenarios/demo-startup.json --load 0.5A..4A:8 --line 18V,24V,36V\n\n\
        Each point replaces the load by a constant-current sink of that current and finds \
        the steady state by shooting, in parallel. Writes DIR/<name>-efficiency/ with \
        efficiency.csv and efficiency.json (SI units: power-stage efficiency, efficiency \
        with the scenario's bias_power, every element's loss) and efficiency.svg \
        (efficiency against output power, one colour per input voltage; solid: power \
        stage, dashed: with the bias power)."
    )]
    Efficiency {
        /// Scenario file (JSON; see `stepflux schema`).
        #[arg(value_name = "SCENARIO")]
        scenario: PathBuf,
        /// Output currents: A..B:N, N points from A to B (e.g. 0.5A..4A:8), or one current.
        #[arg(long, value_name = "A..B:N")]
        load: String,
        /// Input voltages, comma-separated (default: the scenario's).
        #[arg(long, value_name = "V1,V2,...")]
        line: Option<String>,
        /// Directory that receives the `<name>-efficiency/` folder.
        #[arg(long, value_name = "DIR", default_value = "out")]
        out: PathBuf,
        /// Points computed at once (0: one per core).
        #[arg(long, value_name = "N", default_value_t = 0)]
        jobs: usize,
    },
    /// Loop gain, crossover and margins at the steady state, switching and averaged model.
    #[command(
        after_help = "Example:\n  stepflux loop scenarios/demo-startup.json --points 200\n  \
        stepflux loop scenarios/demo-startup.json --from 1kHz --to 75kHz --json\n  \
        stepflux loop scenarios/demo-startup.json --method both --points 40\n\n\
        The loop is broken in series at the modulator's control input (between the error \
        amplifier output and the PWM comparator). The switching model's period map is \
        linearised at its periodic steady state (a sampled-data model, evaluated at \
        z = exp(j2πf/fs)); the state-space-averaged model of the same design and \
        compensator is shown beside it. With --method injected or both, a small sinusoid \
        is injected at the same point into the switching simulation at each frequency \
        (the grid moved to frequencies commensurate with the switching period). Writes DIR/<name>-loop/ with loop.csv and \
        loop.json (hertz, dB, degrees) and loop.svg (Bode plot: switching model solid, \
        averaged dashed, crossover and margins marked)."
    )]
    Loop {
        /// Scenario file (JSON; see `stepflux schema`).
        #[arg(value_name = "SCENARIO")]
        scenario: PathBuf,
        /// Switching-model method: sampled (a, the period map's linearisation), injected
        /// (b, sinusoidal injection into the switching simulation, frequencies in
        /// parallel), or both.
        #[arg(long, value_enum, default_value = "sampled")]
        method: crate::loop_cmd::Method,
        /// Frequencies on the logarithmic grid.
        #[arg(long, value_name = "N", default_value_t = 100)]
        points: usize,
        /// Lowest frequency (default: a thousandth of the switching frequency).
        #[arg(long, value_name = "F")]
        from: Option<String>,
        /// Highest frequency, at most half the switching frequency (the default).
        #[arg(long, value_name = "F")]
        to: Option<String>,
        /// Print one JSON object (SI units) instead of text.
        #[arg(long)]
        json: bool,
        /// Directory that receives the `<name>-loop/` folder.
        #[arg(long, value_name = "DIR", default_value = "out")]
        out: PathBuf,
    },
    /// Run one or more scenario files, in parallel, writing each run's outputs.
    #[command(
        after_help = "Example:\n  stepflux run scenarios/demo-startup.json scenarios/demo-load-step.json --out results\n\n\
        Writes DIR/<scenario name>/waveforms.h5, summary.json and plots/*.svg for each \
        scenario. One bad or failing scenario does not stop the others; the most severe \
        outcome over the scenarios decides the exit code. Every scenario is loaded and \
        checked before any runs; two of one name are refused. Ctrl-C or SIGTERM stops each run at its next slice, writing its \
        summary marked interrupted; a second signal ends the process at once."
    )]
    Run {
        /// Scenario files (JSON; see `stepflux schema`).
        #[arg(value_name = "SCENARIO", required = true)]
        scenarios: Vec<PathBuf>,
        /// Directory that receives one folder per scenario.
        #[arg(long, value_name = "DIR", default_value = "out")]
        out: PathBuf,
        /// Scenarios run at once (0: one per core).
        #[arg(long, value_name = "N", default_value_t = 0)]
        jobs: usize,
        /// No progress bars and no per-scenario report (errors still print).
        #[arg(long)]
        quiet: bool,
        /// Print one JSON document with every summary instead of text.
        #[arg(long)]
        json: bool,
        /// Accept runs past the default cost bounds (see `stepflux check`).
        #[arg(long)]
        allow_large: bool,
    },
    /// Plot signals of a waveform file into an SVG file.
    #[command(
        after_help = "Example:\n  stepflux plot out/demo/waveforms.h5 --signal out.v --signal lout.i --out vout.svg\n\n\
        One panel per signal against time; long signals keep every peak (min/max per \
        pixel column). `--x cycles/start` with `--signal cycles/duty` plots the cycle table."
    )]
    Plot {
        /// Waveform file written by `run` or `demo`.
        #[arg(value_name = "FILE.h5")]
        file: PathBuf,
        /// Signal (dataset) names, e.g. out.v, drain.v, cycles/duty.
        #[arg(long = "signal", value_name = "NAME")]
        signals: Vec<String>,
        /// Dataset for the horizontal axis.
        #[arg(long, value_name = "NAME", default_value = "time")]
        x: String,
        /// Start of the window on the horizontal axis, e.g. "2 ms" (default: first sample).
        #[arg(long, value_name = "TIME")]
        from: Option<String>,
        /// End of the window, e.g. "2.1 ms" (default: last sample).
        #[arg(long, value_name = "TIME")]
        to: Option<String>,
        /// SVG file to write.
        #[arg(long = "out", alias = "output", value_name = "FILE.svg")]
        output: PathBuf,
    },
    /// Size a forward converter from its specification and write a complete scenario.
    #[command(
        after_help = "Example:\n  stepflux size --vin 36V..72V --vout 5V --iout 4A --frequency 150kHz \
        --reset reset-winding -o my-design.json\n\n\
        Turns, magnetising inductance, output L and C, ratings and a first-cut voltage-mode \
        compensation (two zeros at the LC resonance, crossover at a tenth of the switching \
        frequency) from textbook relations; each choice is explained in the file's \
        design_notes. Then checks the file like `stepflux check`."
    )]
    Size {
        /// Input voltage range, e.g. 36V..72V (or one voltage).
        #[arg(long, value_name = "A..B")]
        vin: String,
        /// Output voltage.
        #[arg(long, value_name = "V")]
        vout: String,
        /// Full-load output current.
        #[arg(long, value_name = "A")]
        iout: String,
        /// Switching frequency.
        #[arg(long, value_name = "F")]
        frequency: String,
        /// Reset scheme: reset-winding or two-switch.
        #[arg(long, value_name = "SCHEME", default_value = "reset-winding")]
        reset: String,
        /// Output ripple target, peak to peak (default 1 % of the output voltage).
        #[arg(long, value_name = "V")]
        ripple: Option<String>,
        /// Scenario file to write; its stem is the scenario name.
        #[arg(short = 'o', long = "output", value_name = "FILE.json")]
        output: PathBuf,
    },
    /// Compare two runs (summary.json) or two studies (results.json), figure by figure.
    #[command(
        after_help = "Example:\n  stepflux compare out/demo out/two-switch --html compare.html\n\n\
        Each side is a run folder or its summary.json, or a study folder or its \
        results.json. Prints every figure of either side with both values, the difference \
        and the relative difference; changed figures are marked. --html writes the same as \
        one self-contained page."
    )]
    Compare {
        /// First run or study (folder or file).
        #[arg(value_name = "A")]
        a: PathBuf,
        /// Second run or study (folder or file).
        #[arg(value_name = "B")]
        b: PathBuf,
        /// Also write the comparison as an HTML page.
        #[arg(long, value_name = "FILE.html")]
        html: Option<PathBuf>,
    },
    /// Print the JSON Schema of the scenario file format.
    #[command(after_help = "Example:\n  stepflux schema > stepflux.schema.json\n\n\
        Point an editor at the schema (or put \"$schema\" in a scenario) for completion \
        and early checks; `stepflux check` remains the authority.\n\n\
        `stepflux schema --study` prints the schema of the study file of `stepflux batch`.")]
    Schema {
        /// The study file format instead of the scenario format.
        #[arg(long)]
        study: bool,
    },
    /// Run a study: corners, sweeps and Monte Carlo samples of a scenario, in parallel.
    #[command(
        after_help = "Example:\n  stepflux batch scenarios/study_corners.json --jobs 8 --out runs\n  \
        stepflux batch study.json --shard 3/10 --out shard3   (one slice of ten)\n  \
        stepflux batch study.json --shard-from-env --out runs/shard-$SLURM_ARRAY_TASK_ID\n  \
        stepflux batch study.json --resume --out runs         (after an interruption)\n\n\
        Writes DIR/<study>/cases/<id>.json as each case ends, then results.csv, \
        results.json and worst.json. Shard I/N runs the cases whose 0-based index k has \
        k mod N = I-1. --shard-from-env takes I and N from a Slurm job array task: \
        I-1 = (SLURM_ARRAY_TASK_ID - SLURM_ARRAY_TASK_MIN) / SLURM_ARRAY_TASK_STEP and \
        N = SLURM_ARRAY_TASK_COUNT. --resume also removes temporary files a crashed run \
        left."
    )]
    Batch {
        /// Study file (JSON; see `stepflux schema --study`).
        #[arg(value_name = "STUDY")]
        study: PathBuf,
        /// Cases run at once (0: one per core).
        #[arg(long, value_name = "N", default_value_t = 0)]
        jobs: usize,
        /// Directory that receives the `<study>/` results folder.
        #[arg(long, value_name = "DIR", default_value = "out")]
        out: PathBuf,
        /// Skip cases whose result file exists from an earlier run of the same study.
        #[arg(long)]
        resume: bool,
        /// Run only shard I of N (cases with index mod N = I-1).
        #[arg(long, value_name = "I/N")]
        shard: Option<Shard>,
        /// Run the shard of this job-array task: I and N from SLURM_ARRAY_TASK_ID,
        /// _MIN, _STEP and _COUNT (bad input when they are missing or inconsistent).
        #[arg(long, conflicts_with = "shard")]
        shard_from_env: bool,
        /// Which cases keep their waveform folder.
        #[arg(long, value_enum, default_value_t = Waveforms::Failed)]
        waveforms: Waveforms,
        /// Print the cases (id and parameter values in SI units) as CSV and run nothing.
        #[arg(long)]
        list: bool,
        /// No progress bar and no tally (errors still print).
        #[arg(long)]
        quiet: bool,
        /// Accept cases past the default cost bounds (see `stepflux check`).
        #[arg(long)]
        allow_large: bool,
    },
    /// Join the results of batch shards into the tables of the whole study.
    #[command(
        after_help = "Example:\n  stepflux merge shard1 shard2 shard3 --out runs\n\n\
        Each DIR is a batch --out folder (or the study folder inside it); a case \
        found in no folder counts as errored."
    )]
    Merge {
        /// Shard output folders.
        #[arg(value_name = "DIR", required = true)]
        dirs: Vec<PathBuf>,
        /// Directory that receives the merged `<study>/` folder.
        #[arg(long, value_name = "DIR", default_value = "merged")]
        out: PathBuf,
    },
}
