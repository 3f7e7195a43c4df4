#!/usr/bin/env bash
# One shard of a stepflux study per task of a Slurm job array.
#
#   sbatch --array=0-7 cluster/slurm-study.sh STUDY RUNS [batch options...]
#
# Task k of the array (counted from its first index) runs shard k+1 of N, N being the
# number of tasks: `stepflux batch --shard-from-env` reads SLURM_ARRAY_TASK_ID, _MIN,
# _STEP and _COUNT, so one line serves every task and the array's size is set where it
# is submitted. Each task writes RUNS/shard-<task id>/; cluster/slurm-merge.sh joins them.
# The binary is $STEPFLUX if set (sbatch passes the submitting shell's environment),
# else `stepflux` on PATH. cluster/slurm-submit.sh submits this and the merge together.
#
#SBATCH --job-name=stepflux-study
#SBATCH --array=0-3
#SBATCH --cpus-per-task=1
#SBATCH --output=slurm-%A_%a.out
set -euo pipefail

if [[ $# -lt 2 ]]; then
    echo "usage: sbatch --array=0-(N-1) $0 STUDY RUNS [stepflux batch options...]" >&2
    exit 2
fi
study=$1
runs=$2
shift 2

status=0
"${STEPFLUX:-stepflux}" batch "${study}" --shard-from-env \
    --jobs "${SLURM_CPUS_PER_TASK:-1}" \
    --out "${runs}/shard-${SLURM_ARRAY_TASK_ID:?not a job array task}" "$@" || status=$?

# Exit 1 means every case ran and one failed a limit: a finding of the study, not a
# failure of the task, so the merge (which depends on every task ending with 0) still
# runs and reports it. Bad input (2) and errored or unwritten cases (3) stop it.
if [[ ${status} -eq 1 ]]; then
    echo "shard ran; a case failed a limit (the merged tables say which)"
    exit 0
fi
exit "${status}"
