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
}
