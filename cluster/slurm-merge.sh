#!/usr/bin/env bash
# Joins the shards of a study run by cluster/slurm-study.sh into the tables of the
# whole study, RUNS/merged/<study>/ (results.csv, results.json, worst.json). Submit it
# to run once every task of the array has ended well:
#
#   sbatch --dependency=afterok:<array job id> cluster/slurm-merge.sh RUNS
#
# Its exit status is the study's verdict, as `stepflux merge` documents it: 0 every
# case passed, 1 a case failed a limit, 3 a case errored or is missing.
#
#SBATCH --job-name=stepflux-merge
#SBATCH --cpus-per-task=1
#SBATCH --output=slurm-merge-%j.out
set -euo pipefail

if [[ $# -ne 1 ]]; then
    echo "usage: sbatch --dependency=afterok:<array job id> $0 RUNS" >&2
    exit 2
fi
runs=$1

shopt -s nullglob
shards=("${runs}"/shard-*)
if [[ ${#shards[@]} -eq 0 ]]; then
    echo "error: no shard folders (shard-*) in ${runs}" >&2
    exit 2
fi
exec "${STEPFLUX:-stepflux}" merge "${shards[@]}" --out "${runs}/merged"
