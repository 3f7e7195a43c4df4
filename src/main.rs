//! `stepflux` command-line entry point: parses arguments, dispatches to a
//! command, and turns failures into a documented exit code plus the full
//! error context chain on stderr.

mod cli;
mod demo;
mod exit;
mod job;
mod pipeline;
mod report;
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
        Command::Demo { out } => {
            if out.exists() && !out.is_dir() {
                return Err(anyhow::anyhow!(
                    "output location {} exists and is not a directory",
                    out.display()
                ))
                .exit_with(Exit::BadInput);
            }
            let output = demo::run(&out, &|_| {}).exit_with(Exit::SimulationFailed)?;
            print_run(&output);
            if output.summary.passed {
                Ok(())
            } else {
                Err(anyhow::anyhow!("a spec limit failed")).exit_with(Exit::SpecFailed)
            }
        }
    }
}

/// Where a run's outputs are and its key figures. A closed stdout (a pager quit early)
/// is not an error worth a panic, so write failures are ignored.
fn print_run(output: &pipeline::RunOutput) {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    let s = &output.summary;
    let _ = writeln!(
        out,
        "{}: {} cycles, {:.3} ms simulated in {:.2} s",
        s.scenario,
        s.cycles,
        1e3 * s.simulated_time_s,
        s.run_time_s
    );
    for f in &s.measurements {
        let _ = writeln!(out, "  {:<32} {:>12.5} {}", f.name, f.value, f.unit);
    }
    for v in &s.verdicts {
        let mark = if v.pass { "pass" } else { "FAIL" };
        let _ = writeln!(
            out,
            "  [{mark}] {} = {:.4} ({} {})",
            v.limit, v.value, v.kind, v.bound
        );
    }
    let _ = writeln!(
        out,
        "  waveforms: {}",
        output.dir.join("waveforms.h5").display()
    );
    let _ = writeln!(
        out,
        "  summary:   {}",
        output.dir.join("summary.json").display()
    );
    for p in &output.plots {
        let _ = writeln!(out, "  plot:      {}", p.display());
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
