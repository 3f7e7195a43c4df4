//! `stepflux` command-line entry point: parses arguments, dispatches to a
//! command, and turns failures into a documented exit code plus the full
//! error context chain on stderr.

mod batch;
mod check;
mod cli;
mod demo;
mod efficiency_cmd;
mod exit;
mod job;
mod loop_cmd;
mod measurements;
mod pipeline;
mod plot_cmd;
mod print;
mod report;
mod run_cmd;
mod scenario;
mod settle_cmd;
mod steady;
mod units;
mod writers;

use std::process::ExitCode;

use clap::Parser;

use cli::{Cli, Command};
use exit::{Exit, ExitWith, Failure};

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
        Command::Check { scenario, json } => check::check(&scenario, json),
        Command::Schema { study: false } => check::schema(),
        Command::Schema { study: true } => batch::print_schema(),
        Command::Batch {
            study,
            jobs,
            out,
            resume,
            shard,
            shard_from_env,
            waveforms,
            list,
            quiet,
        } => batch::batch(&batch::BatchArgs {
            study,
            jobs,
            out,
            resume,
            shard: match (shard, shard_from_env) {
                (_, true) => batch::ShardSource::ArrayEnv,
                (Some(s), false) => batch::ShardSource::Given(s),
                (None, false) => batch::ShardSource::Whole,
            },
            waveforms,
            list,
            quiet,
        }),
        Command::Merge { dirs, out } => batch::merge(&dirs, &out),
        Command::Settle { scenario, json } => settle_cmd::settle(&scenario, json),
        Command::Efficiency {
            scenario,
            load,
            line,
            out,
            jobs,
        } => efficiency_cmd::efficiency(&efficiency_cmd::EfficiencyArgs {
            scenario,
            load,
            line,
            out,
            jobs,
        }),
        Command::Loop {
            scenario,
            points,
            from,
            to,
            json,
            out,
        } => loop_cmd::run(&loop_cmd::LoopArgs {
            scenario,
            points,
            from,
            to,
            json,
            out,
        }),
        Command::Run {
            scenarios,
            out,
            jobs,
            quiet,
            json,
        } => run_cmd::run(&scenarios, &out, jobs, run_cmd::Reporting { quiet, json }),
        Command::Plot {
            file,
            signals,
            x,
            output,
        } => plot_cmd::plot(&file, &signals, &x, &output),
        Command::Demo { out } => {
            if out.exists() && !out.is_dir() {
                return Err(anyhow::anyhow!(
                    "output location {} exists and is not a directory",
                    out.display()
                ))
                .exit_with(Exit::BadInput);
            }
            let output = demo::run(&out, &|_| {}).exit_with(Exit::SimulationFailed)?;
            print::run_summary(&output);
            if output.summary.passed {
                Ok(())
            } else {
                Err(anyhow::anyhow!("a spec limit failed")).exit_with(Exit::SpecFailed)
            }
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
