//! Which slice of a study one process runs: `--shard I/N` given by hand, or the task
//! of a scheduler's job array read from its environment (`--shard-from-env`), so one
//! array script line serves every task.
//!
//! Slurm numbers the tasks of `sbatch --array=MIN-MAX[:STEP]` and tells each task
//! `SLURM_ARRAY_TASK_ID`, `_COUNT`, `_MIN`, `_MAX` and `_STEP`. Task k-th of the range
//! (0-based) runs shard k+1 of COUNT, so `--array=0-3` and `--array=1-4` split a study
//! the same way as `--shard 1/4` … `--shard 4/4`.

use anyhow::{bail, Context, Result};

/// A slice of a study: shard `index` (1-based) of `count`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Shard {
    /// 1-based shard number.
    pub index: usize,
    /// Number of shards.
    pub count: usize,
}

impl std::str::FromStr for Shard {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, String> {
        let bad = || format!("{s:?} is not I/N with 1 <= I <= N, e.g. 2/8");
        let (i, n) = s.split_once('/').ok_or_else(bad)?;
        let (index, count) = (
            i.trim().parse::<usize>().map_err(|_| bad())?,
            n.trim().parse::<usize>().map_err(|_| bad())?,
        );
        if index == 0 || index > count {
            return Err(bad());
        }
        Ok(Shard { index, count })
    }
}

impl std::fmt::Display for Shard {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

impl Shard {
    /// Round robin: case k belongs to shard (k mod N) + 1.
    pub(super) fn contains(self, case_index: usize) -> bool {
        case_index % self.count == self.index - 1
    }
}

/// Where the slice of a batch run comes from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ShardSource {
    /// The whole study.
    Whole,
    /// `--shard I/N`.
    Given(Shard),
    /// `--shard-from-env`: the job-array task in the environment.
    ArrayEnv,
}

/// The job-array variables `--shard-from-env` reads.
pub const TASK_ID: &str = "SLURM_ARRAY_TASK_ID";
pub const TASK_COUNT: &str = "SLURM_ARRAY_TASK_COUNT";
pub const TASK_MIN: &str = "SLURM_ARRAY_TASK_MIN";
pub const TASK_MAX: &str = "SLURM_ARRAY_TASK_MAX";
pub const TASK_STEP: &str = "SLURM_ARRAY_TASK_STEP";

/// The shard of the job-array task described by `var` (the process environment, or a
/// table in tests). ID and COUNT are required; MIN defaults to 0 and STEP to 1 (a
/// scheduler always sets them; a person imitating one may not); MAX, when present,
/// must agree with the others, which catches arrays that are not one regular range.
pub fn from_array_env(var: impl Fn(&str) -> Option<String>) -> Result<Shard> {
    let required = |name: &str| -> Result<usize> {
        match var(name) {
            Some(text) => number(name, &text),
            None => bail!(
                "{name} is not set: --shard-from-env runs one task of a job array \
                 (submit with e.g. `sbatch --array=0-3`), or give --shard I/N"
            ),
        }
    };
    let optional = |name: &str, default: usize| -> Result<usize> {
        var(name).map_or(Ok(default), |text| number(name, &text))
    };
    let id = required(TASK_ID)?;
    let count = required(TASK_COUNT)?;
    let min = optional(TASK_MIN, 0)?;
    let step = optional(TASK_STEP, 1)?;
    let position = task_position(id, min, step)?;
    if count == 0 || position >= count {
        bail!(
            "{TASK_ID}={id} is not one of the {count} tasks of a range starting at \
             {TASK_MIN}={min} in steps of {step}"
        );
    }
    if let Some(max) = var(TASK_MAX) {
        let max = number(TASK_MAX, &max)?;
        if max < min || (max - min) % step != 0 || (max - min) / step + 1 != count {
            bail!(
                "the array {min}-{max}:{step} does not have {TASK_COUNT}={count} tasks; \
                 --shard-from-env needs one regular range such as --array=0-{}",
                count.max(1) - 1
            );
        }
    }
    Ok(Shard {
        index: position + 1,
        count,
    })
}

/// 0-based place of task `id` in the range MIN, MIN+STEP, ….
fn task_position(id: usize, min: usize, step: usize) -> Result<usize> {
    if step == 0 {
        bail!("{TASK_STEP}=0: an array step must be at least 1");
    }
    if id < min || (id - min) % step != 0 {
        bail!("{TASK_ID}={id} is not in the range starting at {TASK_MIN}={min} in steps of {step}");
    }
    Ok((id - min) / step)
}

fn number(name: &str, text: &str) -> Result<usize> {
    text.trim()
        .parse::<usize>()
        .with_context(|| format!("{name}={text:?} is not a whole number"))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn env<'a>(vars: &'a [(&'a str, &'a str)]) -> impl Fn(&str) -> Option<String> + 'a {
        |name| {
            vars.iter()
                .find(|(k, _)| *k == name)
                .map(|(_, v)| v.to_string())
        }
    }

    fn shard(vars: &[(&str, &str)]) -> Result<Shard> {
        from_array_env(env(vars))
    }

    #[test]
    fn a_zero_based_array_maps_task_k_to_shard_k_plus_1() {
        // `sbatch --array=0-3` (Slurm sets MIN 0, MAX 3, STEP 1, COUNT 4).
        for id in 0..4 {
            let id_text = id.to_string();
            let s = shard(&[
                (TASK_ID, &id_text),
                (TASK_COUNT, "4"),
                (TASK_MIN, "0"),
                (TASK_MAX, "3"),
                (TASK_STEP, "1"),
            ])
            .unwrap();
            assert_eq!(
                s,
                Shard {
                    index: id + 1,
                    count: 4
                }
            );
        }
    }

    #[test]
    fn an_array_not_starting_at_zero_is_offset_by_its_minimum() {
        // `--array=1-4` and `--array=10-16:2` split the study like `--array=0-3`.
        let one_based = shard(&[(TASK_ID, "1"), (TASK_COUNT, "4"), (TASK_MIN, "1")]).unwrap();
        assert_eq!(one_based, Shard { index: 1, count: 4 });
        let stepped = shard(&[
            (TASK_ID, "14"),
            (TASK_COUNT, "4"),
            (TASK_MIN, "10"),
            (TASK_MAX, "16"),
            (TASK_STEP, "2"),
        ])
        .unwrap();
        assert_eq!(stepped, Shard { index: 3, count: 4 });
    }

    #[test]
    fn missing_variables_are_named() {
        let e = shard(&[(TASK_COUNT, "4")]).unwrap_err().to_string();
        assert!(e.contains(TASK_ID) && e.contains("not set"), "{e}");
        let e = shard(&[(TASK_ID, "0")]).unwrap_err().to_string();
        assert!(e.contains(TASK_COUNT) && e.contains("not set"), "{e}");
    }

    #[test]
    fn inconsistent_variables_are_refused() {
        let bad: &[(&str, &[(&str, &str)])] = &[
            ("not a number", &[(TASK_ID, "x"), (TASK_COUNT, "4")]),
            ("negative", &[(TASK_ID, "-1"), (TASK_COUNT, "4")]),
            // Also a 1-based array whose MIN got lost: its last task falls off the end.
            ("id past the count", &[(TASK_ID, "4"), (TASK_COUNT, "4")]),
            (
                "id below the minimum",
                &[(TASK_ID, "0"), (TASK_COUNT, "4"), (TASK_MIN, "1")],
            ),
            ("zero tasks", &[(TASK_ID, "0"), (TASK_COUNT, "0")]),
            (
                "zero step",
                &[(TASK_ID, "0"), (TASK_COUNT, "4"), (TASK_STEP, "0")],
            ),
            (
                "off the step",
                &[
                    (TASK_ID, "11"),
                    (TASK_COUNT, "4"),
                    (TASK_MIN, "10"),
                    (TASK_STEP, "2"),
                ],
            ),
            // `--array=0,1,5`: three tasks, not the range 0-5.
            (
                "sparse list",
                &[
                    (TASK_ID, "1"),
                    (TASK_COUNT, "3"),
                    (TASK_MIN, "0"),
                    (TASK_MAX, "5"),
                ],
            ),
        ];
        for (what, vars) in bad {
            assert!(shard(vars).is_err(), "{what}: {:?}", shard(vars));
        }
    }
}
