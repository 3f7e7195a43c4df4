//! `stepflux` command-line entry point: parses arguments, dispatches to a
//! command, and turns failures into a documented exit code plus the full
//! error context chain on stderr.

mod cli;
mod demo;
mod exit;
mod writers;

use std::process::ExitCode;

use clap::Parser;

use cli::{Cli, Command};
use exit::{Exit, Failure};

fn main() -> ExitCode {
    // Clap exits on its own with 2 for usage errors and 0 for --help,
    // consistent with `Exit`.
    let cli = Cli::parse();
    match run(cli) {
        Ok(()) => Exit::Ok.into(),
        Err(failure) => {
            report(&failure);
            failure.exit.into()
        }
    }
}

fn run(cli: Cli) -> Result<(), Failure> {
    match cli.command {
        Command::Demo { out } => {
            let written = demo::run(&out)?;
            println!(
                "wrote {} ({} samples per signal)",
                written.path.display(),
                written.samples
            );
            Ok(())
        }
    }
}

/// Print the outermost message, then each cause on its own line, so the
/// user sees both what was being attempted and the underlying reason.
fn report(failure: &Failure) {
    let mut chain = failure.error.chain();
    if let Some(top) = chain.next() {
        eprintln!("error: {top}");
    }
    for cause in chain {
        eprintln!("  caused by: {cause}");
    }
}
