//! Process exit codes: the one place they are defined, so README, `--help`
//! and scripts that branch on them cannot drift apart.

use std::fmt;
use std::process::ExitCode;

/// Documented exit status of a `stepflux` invocation.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[repr(u8)]
pub enum Exit {
    /// Run completed and every checked limit held.
    Ok = 0,
    /// Run completed but at least one specification limit was violated, or `check`
    /// found the design failing by its paper figures (it can still be run).
    SpecFailed = 1,
    /// Arguments, scenario or output location were unusable. Clap's own
    /// usage errors also exit with 2, which is why this value was chosen.
    BadInput = 2,
    /// The run could not be completed: solver failure, or its results could
    /// not be written.
    SimulationFailed = 3,
    /// Stopped by SIGINT or SIGTERM: the results computed so far were written, the
    /// summary marked interrupted.
    Interrupted = 4,
}

impl Exit {
    /// Every exit status, in code order (the README's table lists exactly these).
    pub const ALL: [Exit; 5] = [
        Exit::Ok,
        Exit::SpecFailed,
        Exit::BadInput,
        Exit::SimulationFailed,
        Exit::Interrupted,
    ];

    pub const fn code(self) -> u8 {
        self as u8
    }

    /// A few words for `--help`; the README's table says the same at length.
    pub const fn brief(self) -> &'static str {
        match self {
            Exit::Ok => "ok",
            Exit::SpecFailed => {
                "the design fails (a spec limit, a runaway core, check's paper figures)"
            }
            Exit::BadInput => "bad input",
            Exit::SimulationFailed => "simulation failed",
            Exit::Interrupted => "interrupted (SIGINT/SIGTERM; partial results written)",
        }
    }

    /// The exit-code line `stepflux --help` ends with, built from [`Exit::ALL`].
    pub fn help_line() -> String {
        let codes: Vec<String> = Exit::ALL
            .iter()
            .map(|e| format!("{} {}", e.code(), e.brief()))
            .collect();
        format!("Exit codes: {}.", codes.join(", "))
    }

    /// Rank among several outcomes (run, batch): the most severe decides the exit.
    /// An interruption outranks all, as the work was not done; a failed simulation
    /// outranks bad input, which outranks a failed limit.
    pub const fn severity(self) -> u8 {
        match self {
            Exit::Ok => 0,
            Exit::SpecFailed => 1,
            Exit::BadInput => 2,
            Exit::SimulationFailed => 3,
            Exit::Interrupted => 4,
        }
    }
}

/// When `check` (and `size`, which checks the file it writes) ends with each code.
const CHECK: &[(Exit, &str)] = &[
    (
        Exit::Ok,
        "the scenario can run and its design passes by its paper figures (warnings included)",
    ),
    (
        Exit::SpecFailed,
        "it can run but the paper figures say the design fails (duty beyond the reset \
         limit, drain stress above a rating: `run` shows how)",
    ),
    (
        Exit::BadInput,
        "it cannot run (the file position or field path of the problem on stderr), or its \
         cost estimate is past the default bounds (1e8 switching periods, 10 GB of \
         waveforms, a sample interval below the engine's time quantum) without --allow-large",
    ),
];

/// When `batch` (and `merge`) ends with each code.
const BATCH: &[(Exit, &str)] = &[
    (Exit::Ok, "every case passed"),
    (Exit::SpecFailed, "a case failed a limit"),
    (
        Exit::BadInput,
        "the study or the shard given is invalid, or --out is unusable",
    ),
    (
        Exit::SimulationFailed,
        "a case errored (this outranks a failed limit; in `merge` a case found in no \
         folder counts as errored)",
    ),
    (
        Exit::Interrupted,
        "stopped by SIGINT or SIGTERM: finished cases are kept, --resume does the rest",
    ),
];

/// What each command's exit codes mean for it, shown under its `--help` (built at
/// parse time, [`crate::cli::Cli::parse_args`]): the codes are written here only.
pub const OUTCOMES: &[(&str, &[(Exit, &str)])] = &[
    ("check", CHECK),
    ("size", CHECK),
    (
        "settle",
        &[(
            Exit::SimulationFailed,
            "there is no periodic steady state (subharmonic or no convergence, with the \
             states that do not settle)",
        )],
    ),
    (
        "efficiency",
        &[(Exit::SimulationFailed, "a point has no steady state")],
    ),
    (
        "loop",
        &[
            (
                Exit::BadInput,
                "an open-loop scenario or a bad frequency range",
            ),
            (Exit::SimulationFailed, "there is no steady state"),
        ],
    ),
    (
        "run",
        &[
            (Exit::Ok, "every scenario ran and held its limits"),
            (Exit::SpecFailed, "a limit failed"),
            (Exit::BadInput, "a scenario or --out is unusable"),
            (
                Exit::SimulationFailed,
                "a simulation failed or its results could not be written",
            ),
            (
                Exit::Interrupted,
                "stopped by SIGINT or SIGTERM (each run's summary marked interrupted)",
            ),
        ],
    ),
    ("batch", BATCH),
    ("merge", BATCH),
];

/// The paragraph under one command's `--help`: "Exit codes: 0 when …; 1 when …."
pub fn command_help(outcomes: &[(Exit, &str)]) -> String {
    let lines: Vec<String> = outcomes
        .iter()
        .map(|(e, when)| format!("{} when {when}", e.code()))
        .collect();
    format!("Exit codes: {}.", lines.join("; "))
}

impl From<Exit> for ExitCode {
    fn from(exit: Exit) -> Self {
        ExitCode::from(exit.code())
    }
}

/// An error tagged with the exit code it should end the process with.
///
/// Classification happens where the failure is understood (e.g. "this path
/// came from the user"), not by guessing from the message in `main`.
#[derive(Debug)]
pub struct Failure {
    pub exit: Exit,
    pub error: anyhow::Error,
}

impl fmt::Display for Failure {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.error)
    }
}

/// Attach an exit classification to any fallible result.
pub trait ExitWith<T> {
    fn exit_with(self, exit: Exit) -> Result<T, Failure>;
}

impl<T, E: Into<anyhow::Error>> ExitWith<T> for Result<T, E> {
    fn exit_with(self, exit: Exit) -> Result<T, Failure> {
        self.map_err(|e| Failure {
            exit,
            error: e.into(),
        })
    }
}

/// Refuses an output location that exists and is not a directory: bad input (exit 2)
/// for every command that writes a results folder, checked before any work starts.
pub fn usable_out(out: &std::path::Path) -> Result<(), Failure> {
    if out.exists() && !out.is_dir() {
        return Err(anyhow::anyhow!(
            "output location {} exists and is not a directory",
            out.display()
        ))
        .exit_with(Exit::BadInput);
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every command named in the table exists, so no paragraph is silently dropped.
    #[test]
    fn outcomes_name_real_commands() {
        use clap::CommandFactory;
        let cli = crate::cli::Cli::command();
        for (name, outcomes) in OUTCOMES {
            assert!(cli.find_subcommand(name).is_some(), "{name}");
            assert!(!outcomes.is_empty(), "{name}");
        }
    }

    #[test]
    fn codes_match_readme() {
        // Source: README.md "Exit codes" section.
        assert_eq!(Exit::Ok.code(), 0);
        assert_eq!(Exit::SpecFailed.code(), 1);
        assert_eq!(Exit::BadInput.code(), 2);
        assert_eq!(Exit::SimulationFailed.code(), 3);
        assert_eq!(Exit::Interrupted.code(), 4);
    }
}
