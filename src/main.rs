//! `stepflux` command-line entry point: parses arguments, dispatches to a
//! command, and turns failures into a documented exit code plus the full
//! error context chain on stderr.

use std::process::ExitCode;

use stepflux::cli::{Cli, Command};
use stepflux::exit::{Exit, ExitWith, Failure};
use stepflux::{
    batch, check, compare_cmd, demo, efficiency_cmd, loop_cmd, plot_cmd, print, run_cmd,
    settle_cmd, size_cmd,
};

/// The allocator of the whole process (see the note at its dependency in `Cargo.toml`).
#[global_allocator]
static ALLOCATOR: mimalloc::MiMalloc = mimalloc::MiMalloc;

fn main() -> ExitCode {
    restore_broken_pipe_default();
    let cli = Cli::parse_args();
    match run(cli) {
        Ok(()) => Exit::Ok.into(),
        Err(failure) => {
            report(&failure);
            failure.exit.into()
        }
    }
}

/// A reader that closes standard output early (`stepflux schema | head`) ends the
/// process quietly, as it ends other Unix tools, instead of a panic at the next print:
/// Rust ignores SIGPIPE by default, which turns the closed pipe into a write error.
fn restore_broken_pipe_default() {
    #[cfg(unix)]
    // SAFETY: called first thing in main, before any thread exists; SIG_DFL is a
    // valid disposition for SIGPIPE.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
}

fn run(cli: Cli) -> Result<(), Failure> {
    match cli.command {
        Command::Check {
            scenario,
            json,
            allow_large,
        } => check::check(&scenario, json, allow_large),
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
            allow_large,
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
            allow_large,
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
            method,
            points,
            from,
            to,
            json,
            out,
        } => loop_cmd::run(&loop_cmd::LoopArgs {
            scenario,
            method,
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
            allow_large,
        } => run_cmd::run(
            &scenarios,
            &out,
            jobs,
            run_cmd::Reporting { quiet, json },
            allow_large,
        ),
        Command::Plot {
            file,
            signals,
            x,
            from,
            to,
            output,
        } => plot_cmd::plot(
            &file,
            &signals,
            &x,
            (from.as_deref(), to.as_deref()),
            &output,
        ),
        Command::Size {
            vin,
            vout,
            iout,
            frequency,
            reset,
            ripple,
            output,
        } => size_cmd::size(&size_cmd::SizeArgs {
            vin: &vin,
            vout: &vout,
            iout: &iout,
            frequency: &frequency,
            reset: &reset,
            ripple: ripple.as_deref(),
            output: &output,
        }),
        Command::Compare { a, b, html } => compare_cmd::compare(&a, &b, html.as_deref()),
        Command::Demo { out } => {
            stepflux::exit::usable_out(&out)?;
            let output = demo::run(&out, &|_| {}).exit_with(Exit::SimulationFailed)?;
            print::run_summary(&output);
            if output.summary.interrupted.is_some() {
                Err(anyhow::anyhow!("interrupted")).exit_with(Exit::Interrupted)
            } else if output.summary.passed {
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
    let mut causes = stepflux::text::causes(&failure.error).into_iter();
    if let Some(top) = causes.next() {
        eprintln!("error: {top}");
    }
    for cause in causes {
        eprintln!("  caused by: {cause}");
    }
}
