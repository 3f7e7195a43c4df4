//! Command-line surface. Parsing only; behaviour lives in the command modules.

use std::path::PathBuf;

use clap::{Parser, Subcommand};

#[derive(Debug, Parser)]
#[command(
    name = "stepflux",
    version,
    about = "Cycle-by-cycle time-domain simulator for forward converters and their PWM control loops",
    after_help = "Exit codes: 0 ok, 1 a spec limit failed, 2 bad input, 3 simulation failed."
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
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
        Exits 0 when the scenario can run (warnings included), 2 when it cannot, with the \
        file position or field path of the problem on stderr."
    )]
    Check {
        /// Scenario file (JSON; see `stepflux schema`).
        #[arg(value_name = "SCENARIO")]
        scenario: PathBuf,
        /// Print one JSON object instead of text.
        #[arg(long)]
        json: bool,
    },
    /// Print the JSON Schema of the scenario file format.
    #[command(after_help = "Example:\n  stepflux schema > stepflux.schema.json\n\n\
        Point an editor at the schema (or put \"$schema\" in a scenario) for completion \
        and early checks; `stepflux check` remains the authority.")]
    Schema,
}
