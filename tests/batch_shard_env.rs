//! `--shard-from-env` runs the slice of a job-array task: the task's place in the
//! array and the array's size, read from the scheduler's variables, select the same
//! cases as `--shard I/N`; missing or inconsistent variables are bad input (exit 2,
//! README "Exit codes"). Specification: issue 16 part 3 (a real cluster).

mod common;

use std::path::Path;
use std::process::Output;

use common::*;

const ARRAY_VARS: [&str; 5] = [
    "SLURM_ARRAY_TASK_ID",
    "SLURM_ARRAY_TASK_COUNT",
    "SLURM_ARRAY_TASK_MIN",
    "SLURM_ARRAY_TASK_MAX",
    "SLURM_ARRAY_TASK_STEP",
];

/// Environment variables of a job-array task, name and value.
type Vars = Vec<(&'static str, String)>;

/// `stepflux batch STUDY` plus `args`, with exactly `vars` of the array variables
/// set: the test may itself run inside a job array, whose own values must not leak in.
fn batch_in_task(study: &Path, vars: &[(&str, String)], args: &[&str]) -> Output {
    let mut cmd = stepflux();
    cmd.arg("batch").arg(study).args(args);
    for v in ARRAY_VARS {
        cmd.env_remove(v);
    }
    cmd.envs(vars.iter().map(|(k, v)| (*k, v.as_str())));
    cmd.output().expect("binary runs")
}

/// The case plan (`--list`) a task with `vars` runs.
fn list(study: &Path, vars: &[(&str, String)], extra: &[&str]) -> Output {
    let args: Vec<&str> = ["--list"].iter().chain(extra).copied().collect();
    batch_in_task(study, vars, &args)
}

/// The variables Slurm gives task `id` of `sbatch --array=MIN-MAX` (step 1).
fn task(id: usize, min: usize, max: usize) -> Vars {
    vec![
        ("SLURM_ARRAY_TASK_ID", id.to_string()),
        ("SLURM_ARRAY_TASK_COUNT", (max - min + 1).to_string()),
        ("SLURM_ARRAY_TASK_MIN", min.to_string()),
        ("SLURM_ARRAY_TASK_MAX", max.to_string()),
        ("SLURM_ARRAY_TASK_STEP", "1".to_string()),
    ]
}

#[test]
fn each_array_task_lists_the_cases_of_its_shard() {
    let root = scratch("batch_shard_env");
    let study = write_study(&root, &quick_study("env"));
    // Arrays numbered from 0 and from 1 split the twelve cases alike: the k-th task of
    // the range (0-based) is shard k+1 of 4.
    for min in [0, 1] {
        for k in 0..4 {
            let from_env = list(&study, &task(min + k, min, min + 3), &["--shard-from-env"]);
            let shard = format!("{}/4", k + 1);
            let by_hand = list(&study, &[], &["--shard", &shard]);
            code(&from_env, &[0]);
            code(&by_hand, &[0]);
            assert_eq!(
                String::from_utf8_lossy(&from_env.stdout),
                String::from_utf8_lossy(&by_hand.stdout),
                "task {} of --array={min}-{} is shard {shard}",
                min + k,
                min + 3
            );
            // Three of the twelve cases plus the header line.
            assert_eq!(from_env.stdout.iter().filter(|&&b| b == b'\n').count(), 4);
        }
    }
}

#[test]
fn missing_or_inconsistent_array_variables_are_bad_input() {
    let root = scratch("batch_shard_env_bad");
    let study = write_study(&root, &quick_study("env-bad"));
    let count_only = vec![("SLURM_ARRAY_TASK_COUNT", "4".to_string())];
    // Task 4 of an array 0-3 does not exist.
    let past_the_end = {
        let mut t = task(3, 0, 3);
        t[0].1 = "4".to_string();
        t
    };
    let cases: [(&str, Vars, &str); 3] = [
        ("nothing set", vec![], "SLURM_ARRAY_TASK_ID is not set"),
        ("no task id", count_only, "SLURM_ARRAY_TASK_ID is not set"),
        ("id past the end", past_the_end, "SLURM_ARRAY_TASK_ID=4"),
    ];
    for (what, vars, message) in cases {
        let out = root.join("out");
        let out_arg = out.to_str().unwrap();
        let o = batch_in_task(&study, &vars, &["--out", out_arg, "--shard-from-env"]);
        assert_eq!(code(&o, &[2]), 2, "{what}");
        let stderr = String::from_utf8_lossy(&o.stderr);
        assert!(stderr.contains(message), "{what}: {stderr}");
        assert!(!out.exists(), "{what}: nothing written before the check");
    }
}

#[test]
fn a_shard_given_by_hand_and_from_the_environment_conflict() {
    let root = scratch("batch_shard_env_both");
    let study = write_study(&root, &quick_study("env-both"));
    let o = list(
        &study,
        &task(0, 0, 3),
        &["--shard", "1/4", "--shard-from-env"],
    );
    // Two sources for one slice is a usage error (exit 2), not a silent choice.
    assert_eq!(code(&o, &[2]), 2);
}
