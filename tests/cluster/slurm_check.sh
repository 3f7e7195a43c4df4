#!/usr/bin/env bash
# Cluster check (issue 16, part 3): a study run as a Slurm job array of 4 shards plus
# the merge that depends on it gives the same tables, byte for byte, as the study run
# in one process.
#
#   tests/cluster/slurm_check.sh [STEPFLUX] [STUDY]
#
# STEPFLUX defaults to target/release/stepflux, STUDY to scenarios/study_corners.json.
# Starts a private single-node cluster (munged, slurmctld, slurmd) following
# /work/shared/slurm-single-node.md, but with everything — configuration, key, socket,
# ports, state, logs — in one temporary folder, so the machine's /etc and default
# ports stay untouched and another cluster on the same machine is not disturbed.
# The daemons are stopped by the process ids this script started, on success or
# failure. Needs Debian's slurm-wlm and munge (.ci/run installs them) and root, since
# the daemons run as root and munge; without root or passwordless sudo it skips.
set -euo pipefail

repo=$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)
stepflux=$(realpath -m "${1:-${repo}/target/release/stepflux}")
study=$(realpath -m "${2:-${repo}/scenarios/study_corners.json}")
tasks=4
deadline_s=150 # for the array and the merge; about 10 s on 2 busy cores

log() { echo "slurm check: $*"; }
die() {
    echo "slurm check: FAILED: $*" >&2
    exit 1
}

# --- can this machine run the daemons? ------------------------------------------------
if [[ ${EUID} -ne 0 ]]; then
    if sudo -n true 2>/dev/null; then
        exec sudo -n "${BASH_SOURCE[0]}" "${stepflux}" "${study}"
    fi
    log "SKIPPED: munged, slurmctld and slurmd must be started as root and" \
        "this user is neither root nor allowed passwordless sudo"
    exit 0
fi
for tool in munged munge unmunge slurmctld slurmd sbatch squeue sinfo scontrol scancel setpriv setsid python3; do
    command -v "${tool}" >/dev/null || die "${tool} not found; the check needs slurm-wlm, munge, util-linux and python3"
done
id munge >/dev/null 2>&1 || die "no 'munge' user; is Debian's munge package installed?"
# Root without the right to change user (a container stripped of CAP_SETUID) cannot
# start munged as munge.
if ! setpriv --reuid=munge --regid=munge --init-groups true 2>/dev/null; then
    log "SKIPPED: root here cannot switch to the munge user to start munged"
    exit 0
fi
[[ -x ${stepflux} ]] || die "no stepflux binary at ${stepflux}; build it with cargo build --release"
[[ -f ${study} ]] || die "no study file at ${study}"

# --- the private cluster's folder and teardown ----------------------------------------
work=$(mktemp -d /tmp/stepflux-slurm.XXXXXX)
chmod 755 "${work}" # munged, running as munge, must reach its own folder inside
pids=()             # daemons started here, stopped in reverse order
jobs_submitted=()

stop_pid() {
    local pid=$1 name=$2 i
    kill -0 "${pid}" 2>/dev/null || return 0
    kill -TERM "${pid}" 2>/dev/null || true
    for ((i = 0; i < 100; i++)); do
        kill -0 "${pid}" 2>/dev/null || return 0
        sleep 0.1
    done
    log "${name} (pid ${pid}) ignored TERM for 10 s; killing it"
    kill -KILL "${pid}" 2>/dev/null || true
}

teardown() {
    local status=$? i entry pid
    trap - EXIT
    trap "" INT TERM # a second Ctrl-C must not cut the cleanup short
    if [[ ${#jobs_submitted[@]} -gt 0 ]] && [[ -n $(queued) ]]; then
        log "cancelling jobs still queued: $(queued | tr '\n' ' ')"
        scancel "${jobs_submitted[@]}" 2>/dev/null || true
        # Let slurmd end the jobs' step daemons before slurmd itself goes.
        for ((i = 0; i < 100; i++)); do
            [[ -z $(queued) ]] && break
            sleep 0.1
        done
    fi
    for pid in $(stepd_pids); do
        stop_pid "${pid}" "slurmstepd"
    done
    for ((i = ${#pids[@]} - 1; i >= 0; i--)); do
        entry=${pids[i]}
        stop_pid "${entry%%:*}" "${entry#*:}"
    done
    for entry in "${pids[@]}" $(stepd_pids | sed 's/$/:slurmstepd/'); do
        if kill -0 "${entry%%:*}" 2>/dev/null; then
            echo "slurm check: ${entry#*:} (pid ${entry%%:*}) is still running" >&2
            status=1
        fi
    done
    if [[ ${status} -eq 0 ]]; then
        rm -rf "${work}"
    else
        for f in "${work}"/log/*.log "${work}"/runs/logs/*.out; do
            [[ -f ${f} ]] || continue
            echo "----- last lines of ${f}" >&2
            tail -n 20 "${f}" >&2
        done
        echo "slurm check: kept ${work} for inspection" >&2
    fi
    exit "${status}"
}
trap teardown EXIT
trap 'exit 130' INT TERM

# Jobs of ours the controller still has pending or running.
queued() {
    local ids
    ids=$(IFS=,; echo "${jobs_submitted[*]}")
    squeue -h -j "${ids}" -o '%i' 2>/dev/null || true
}

# Runs "$@" in the background in a session of its own and records its pid for
# teardown. Its own session: a Ctrl-C or a TERM sent to this script's process group
# must reach this script's trap, which cancels the jobs while the daemons still
# answer, not the daemons. The daemons run in the foreground mode (-F, -D) and setsid
# does not fork here (a background job is no group leader), so the pid is the
# daemon's own.
start() {
    local name=$1
    shift
    setsid "$@" >"${work}/log/${name}.out" 2>&1 &
    pids+=("$!:${name}")
}

# Job step daemons of this cluster: slurmd starts one per job and it detaches, so its
# pid is found by the socket it listens on in this cluster's own spool folder.
stepd_pids() {
    command -v ss >/dev/null || return 0
    ss -xlpn 2>/dev/null | grep -F "${work}/spool/" | grep -o 'pid=[0-9]*' | cut -d= -f2 | sort -u
}

wait_for() {
    local what=$1 tries=$2
    shift 2
    local i
    for ((i = 0; i < tries; i++)); do
        "$@" >/dev/null 2>&1 && return 0
        for entry in "${pids[@]}"; do
            kill -0 "${entry%%:*}" 2>/dev/null || die "${entry#*:} exited while waiting for ${what}"
        done
        sleep 0.2
    done
    die "timed out waiting for ${what}"
}

# --- munge ------------------------------------------------------------------------------
start_munge() {
    local m=${work}/munge
    mkdir -p "${m}"/{etc,run,log,lib} "${work}/log"
    dd if=/dev/urandom of="${m}/etc/munge.key" bs=1 count=1024 status=none
    chown -R munge:munge "${m}"
    chmod 700 "${m}"/{etc,log,lib}
    chmod 755 "${m}/run" # clients (slurmctld, slurmd, munge) reach the socket here
    chmod 400 "${m}/etc/munge.key"
    munge_socket=${m}/run/munge.socket
    start munged setpriv --reuid=munge --regid=munge --init-groups \
        "$(command -v munged)" --foreground --socket="${munge_socket}" \
        --key-file="${m}/etc/munge.key" --log-file="${m}/log/munged.log" \
        --pid-file="${m}/run/munged.pid" --seed-file="${m}/lib/munged.seed"
    wait_for "munged to answer" 50 bash -c \
        "munge -n -S '${munge_socket}' | unmunge -S '${munge_socket}'"
}

# --- slurm ------------------------------------------------------------------------------
# Two free TCP ports, held open together so they differ.
free_ports() {
    python3 -c 'import socket
s = [socket.socket() for _ in range(2)]
for x in s: x.bind(("127.0.0.1", 0))
print(*(x.getsockname()[1] for x in s))'
}

write_slurm_conf() {
    local host ports
    host=$(hostname -s)
    read -r -a ports < <(free_ports)
    mkdir -p "${work}"/{etc,state,spool,run}
    export SLURM_CONF=${work}/etc/slurm.conf
    cat >"${SLURM_CONF}" <<CONF
ClusterName=stepflux-check
SlurmctldHost=${host}(127.0.0.1)
SlurmctldPort=${ports[0]}
SlurmdPort=${ports[1]}
AuthType=auth/munge
AuthInfo=socket=${munge_socket}
CredType=cred/munge
SlurmUser=root
SlurmdUser=root
StateSaveLocation=${work}/state
SlurmdSpoolDir=${work}/spool
SlurmctldPidFile=${work}/run/slurmctld.pid
SlurmdPidFile=${work}/run/slurmd.pid
SlurmctldLogFile=${work}/log/slurmctld.log
SlurmdLogFile=${work}/log/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
MpiDefault=none
ReturnToService=2
# A merge whose array failed is cancelled instead of waiting for ever.
DependencyParameters=kill_invalid_depend
NodeName=${host} NodeAddr=127.0.0.1 CPUs=$(nproc) RealMemory=1000 State=UNKNOWN
PartitionName=batch Nodes=ALL Default=YES MaxTime=INFINITE State=UP
CONF
}

node_idle() { sinfo -h -N -o '%T' | grep -qx idle; }

start_slurm() {
    write_slurm_conf
    start slurmctld "$(command -v slurmctld)" -D -c -f "${SLURM_CONF}"
    wait_for "slurmctld to answer" 100 scontrol ping
    start slurmd "$(command -v slurmd)" -D -f "${SLURM_CONF}"
    wait_for "the node to be idle" 150 node_idle
}

# --- the check ---------------------------------------------------------------------------
submit_and_wait() {
    local ids i
    ids=$(STEPFLUX=${stepflux} "${repo}/cluster/slurm-submit.sh" "${study}" "${work}/runs" \
        "${tasks}" --waveforms none)
    log "submitted: ${ids}"
    array=$(sed -n 's/.*array=\([0-9]*\).*/\1/p' <<<"${ids}")
    merge=$(sed -n 's/.*merge=\([0-9]*\).*/\1/p' <<<"${ids}")
    [[ -n ${array} && -n ${merge} ]] || die "could not read the job ids from '${ids}'"
    jobs_submitted=("${array}" "${merge}")
    for ((i = 0; i < deadline_s * 2; i++)); do
        [[ -z $(queued) ]] && return 0
        sleep 0.5
    done
    die "the array and the merge did not finish within ${deadline_s} s"
}

# "<JobState> <ExitCode>" of every task of job $1, one line each.
job_states() {
    scontrol -o show job "$1" | sed -n 's/.*JobState=\([A-Z_]*\).* ExitCode=\([0-9:]*\).*/\1 \2/p'
}

check_jobs() {
    local states
    states=$(job_states "${array}")
    [[ $(grep -c . <<<"${states}") -eq ${tasks} ]] || die "expected ${tasks} array tasks, scontrol shows: ${states}"
    grep -qv '^COMPLETED 0:0$' <<<"${states}" && die "an array task did not complete: ${states}"
    merge_state=$(job_states "${merge}")
    log "array tasks: $(tr '\n' ',' <<<"${states}") merge: ${merge_state}"
    local shard
    for ((k = 0; k < tasks; k++)); do
        shard=${work}/runs/shard-${k}
        [[ -d ${shard} ]] || die "task ${k} wrote no ${shard}"
        grep -q "shard $((k + 1))/${tasks}" "${work}"/runs/logs/study-"${array}"_"${k}".out \
            || die "task ${k}'s log does not name shard $((k + 1))/${tasks}"
    done
}

compare_with_unsharded() {
    local status=0 name f
    "${stepflux}" batch "${study}" --jobs 2 --waveforms none --quiet --out "${work}/whole" || status=$?
    [[ ${status} -le 1 ]] || die "the unsharded run exited ${status}"
    # The merge's verdict is the unsharded run's: its exit code, and so its job state.
    [[ ${merge_state} == "COMPLETED 0:0" && ${status} -eq 0 ]] \
        || [[ ${merge_state} == "FAILED ${status}:0" ]] \
        || die "merge ended '${merge_state}', the unsharded run exited ${status}"
    name=$(basename "$(dirname "$(ls -d "${work}"/whole/*/study.json)")")
    for f in results.csv results.json worst.json; do
        cmp "${work}/runs/merged/${name}/${f}" "${work}/whole/${name}/${f}" \
            || die "merged ${f} differs from the unsharded run's"
    done
    log "merged results.csv, results.json and worst.json of '${name}' equal the unsharded run byte for byte"
}

log "cluster in ${work}"
start_munge
start_slurm
log "single-node cluster up ($(sinfo -h -o '%P %D %c CPUs %T'))"
submit_and_wait
check_jobs
compare_with_unsharded
log "passed in ${SECONDS} s"
