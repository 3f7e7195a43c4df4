#!/usr/bin/env bash
# Submits a study as a Slurm job array of TASKS shards plus the merge that waits for
# them, and prints the two job ids as `array=<id> merge=<id>`.
#
#   cluster/slurm-submit.sh STUDY RUNS [TASKS] [stepflux batch options...]
#
# TASKS defaults to 4. Options after TASKS go to every `stepflux batch`, e.g.
# `--waveforms none`. Task logs go to RUNS/logs/. sbatch's own settings (partition,
# account, time limit) come from its SBATCH_* environment variables or the cluster's
# defaults. The binary is $STEPFLUX if set, else `stepflux` on PATH.
set -euo pipefail

here=$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)
if [[ $# -lt 2 ]]; then
    echo "usage: $0 STUDY RUNS [TASKS] [stepflux batch options...]" >&2
    exit 2
fi
study=$(realpath "$1")
runs=$(realpath -m "$2")
tasks=${3:-4}
shift $(($# < 3 ? $# : 3))
if ! [[ ${tasks} =~ ^[1-9][0-9]*$ ]]; then
    echo "error: TASKS must be a whole number of at least 1, not '${tasks}'" >&2
    exit 2
fi
mkdir -p "${runs}/logs"

# --parsable prints "<id>" or "<id>;<cluster>".
job_id() { local out; out=$("$@"); echo "${out%%;*}"; }

array=$(job_id sbatch --parsable --array="0-$((tasks - 1))" --chdir="${runs}" \
    --output="${runs}/logs/study-%A_%a.out" \
    "${here}/slurm-study.sh" "${study}" "${runs}" "$@")
merge=$(job_id sbatch --parsable --dependency="afterok:${array}" --chdir="${runs}" \
    --output="${runs}/logs/merge-%j.out" \
    "${here}/slurm-merge.sh" "${runs}")
echo "array=${array} merge=${merge}"
