#!/usr/bin/env bash
# The Slurm job scripts of docs/scaling.md, run on a real single-node Slurm
# cluster (issue #22).
#
# What it does, in order:
#   1. installs slurm-wlm and munge from the Debian packages when missing;
#   2. writes a single-node configuration in a scratch folder (this machine as
#      controller and compute node, proctrack/linuxproc, task/none, no
#      accounting database, its own munge socket and key) and starts munged,
#      slurmctld and slurmd as root, then waits until the node is idle;
#   3. synthesises a folder of captures (passing, limit-failing, no-training and
#      unreadable ones) and runs a single-machine `iqaudit batch` over it: the
#      reference summary;
#   4. extracts iqaudit-array.sh and iqaudit-merge.sh from docs/scaling.md
#      (the blocks after the `<!-- slurm-script: NAME` markers, verbatim),
#      submits the array with --array=1-4 and the merge with
#      --dependency=afterany:, and compares the merged summary.jsonl and
#      summary.csv byte for byte with the reference;
#   5. in a fresh output folder, cancels one running array task with scancel
#      (SIGCONT + SIGTERM), checks that the afterany merge is then short of the
#      captures that task never started, re-submits the task, checks that it
#      skips every capture already reported, and that the merge is again
#      byte-identical to the reference;
#   6. times the 4-task array against one task doing the whole folder (and
#      checks that task's summary is the reference too);
#   7. always (trap): cancels what is left in the queue, stops slurmd,
#      slurmctld and munged by the PID files this script wrote, and checks that
#      no process it recorded (daemons, and each job's slurmstepd, shell and
#      iqaudit, recorded by a PATH wrapper that execs the real binary) is alive.
#
# Exit status: 0 passed; 1 a check failed; 77 Slurm cannot be started on this
# machine (not root, packages not installable, a daemon does not start, the
# node never becomes idle): the reason is printed in a banner on stderr.
#
# Environment: IQAUDIT_BIN (default: target/release/iqaudit, built here with
# `cargo build --release` when missing or older than the sources — a no-op after
# `cargo test --release`); IQAUDIT_SLURM_KEEP=1 keeps the scratch folder.
#
# No timing is asserted; the wall times are printed for docs/scaling.md.

set -euo pipefail
cd "$(dirname "$0")/../.."
repo=$(pwd)

log() { printf 'slurm-test: %s\n' "$*" >&2; }

banner() {
    local line='################################################################################'
    printf '\n%s\n# %s\n' "$line" "$1" >&2
    shift
    local l
    for l in "$@"; do printf '# %s\n' "$l" >&2; done
    printf '%s\n\n' "$line" >&2
}

# Slurm cannot run here: say exactly why and exit 77 (the trap still cleans up).
cannot() {
    banner "SLURM TEST NOT RUN: Slurm cannot be started on this machine" "$@" \
        "(tests/cluster/slurm.sh exits 77; see docs/scaling.md \"Tested under Slurm\")"
    exit 77
}

fail() {
    banner "SLURM TEST FAILED" "$@"
    exit 1
}

# --- 0. preconditions -----------------------------------------------------------

[ "$(id -u)" -eq 0 ] ||
    cannot "it must run as root (it starts munged, slurmctld and slurmd); uid is $(id -u)"
[ "$(uname -s)" = Linux ] || cannot "proctrack/linuxproc needs Linux; this is $(uname -s)"

need_cmds=(sbatch squeue scancel sinfo scontrol slurmctld slurmd munged munge unmunge)
missing_cmds() {
    local c m=()
    for c in "${need_cmds[@]}"; do command -v "$c" >/dev/null 2>&1 || m+=("$c"); done
    echo "${m[*]:-}"
}

if [ -n "$(missing_cmds)" ]; then
    command -v apt-get >/dev/null 2>&1 ||
        cannot "missing $(missing_cmds) and there is no apt-get to install slurm-wlm and munge"
    log "installing slurm-wlm and munge (missing: $(missing_cmds))"
    # Packages must not start their services: this script starts its own daemons
    # and must leave nothing running. policy-rc.d 101 = "action forbidden".
    if [ ! -e /usr/sbin/policy-rc.d ]; then
        trap 'rm -f /usr/sbin/policy-rc.d' EXIT
        printf '#!/bin/sh\nexit 101\n' >/usr/sbin/policy-rc.d
        chmod 755 /usr/sbin/policy-rc.d
        own_policy=1
    fi
    apt_ok=1
    { apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq \
        --no-install-recommends slurm-wlm munge >/dev/null; } || apt_ok=0
    if [ "${own_policy:-0}" = 1 ]; then
        rm -f /usr/sbin/policy-rc.d
        trap - EXIT
    fi
    [ "$apt_ok" = 1 ] ||
        cannot "apt-get install slurm-wlm munge failed (messages above): no Debian mirror reachable?"
    [ -z "$(missing_cmds)" ] || cannot "installed slurm-wlm and munge but still missing $(missing_cmds)"
fi
log "$(slurmctld -V), $(munged --version 2>&1 | head -n1)"

# --- the binary, built once -----------------------------------------------------

bin=${IQAUDIT_BIN:-$repo/target/release/iqaudit}
if [ -z "${IQAUDIT_BIN:-}" ]; then
    log "cargo build --release (a no-op when the tests were just built)"
    cargo build --release --quiet --bin iqaudit
fi
[ -x "$bin" ] || fail "$bin is not an executable"

# --- scratch, PID bookkeeping, teardown -----------------------------------------

scratch=$(mktemp -d /tmp/iqaudit-slurm.XXXXXX)
chmod 755 "$scratch"
pids="$scratch/pids"
mkdir -p "$pids" "$scratch/log" "$scratch/state" "$scratch/spool" "$scratch/munge" \
    "$scratch/bin" "$scratch/work/logs"

# Start time of a process (clock ticks since boot, /proc/PID/stat field 22), so a
# recorded PID is only taken for the same process, never for a reused number.
start_time() {
    local s
    s=$(cat "/proc/$1/stat" 2>/dev/null) || return 1
    s=${s##*) }
    set -- $s
    echo "${20}"
}

# record NAME PID: write pids/NAME.pid = "PID STARTTIME".
record() {
    local t
    t=$(start_time "$2") || t=gone
    echo "$2 $t" >"$pids/$1.pid"
}

# alive FILE: the process of a PID file is still the same running process.
alive() {
    local pid st now
    read -r pid st <"$1" || return 1
    now=$(start_time "$pid") || return 1
    [ "$now" = "$st" ] && [ "$(awk '{print $3}' "/proc/$pid/stat" 2>/dev/null)" != Z ]
}

# stop FILE: SIGTERM, up to 20 s, then SIGKILL, for the process of one PID file.
stop() {
    local f=$1 pid i
    alive "$f" || return 0
    read -r pid _ <"$f"
    kill -TERM "$pid" 2>/dev/null || true
    for i in $(seq 1 200); do
        alive "$f" || { wait "$pid" 2>/dev/null || true; return 0; }
        sleep 0.1
    done
    log "$(basename "$f" .pid) (pid $pid) ignored SIGTERM for 20 s; SIGKILL"
    kill -KILL "$pid" 2>/dev/null || true
    wait "$pid" 2>/dev/null || true
}

# any_job_alive: a process recorded for a job (slurmstepd, job shell, iqaudit) still runs.
any_job_alive() {
    local f
    for f in "$pids"/job-*.pid; do
        [ -e "$f" ] && alive "$f" && return 0
    done
    return 1
}

cluster_up=0
teardown() {
    local rc=$? f left=()
    set +e
    trap - EXIT INT TERM
    if [ "$cluster_up" = 1 ]; then
        # Our private cluster: every job in it is this script's.
        local jobs
        jobs=$(squeue -h -o %A 2>/dev/null | sort -u)
        if [ -n "$jobs" ]; then
            log "cancelling jobs still queued: $(echo $jobs)"
            scancel $jobs 2>/dev/null
        fi
    fi
    # slurmstepd outlives slurmd by design, so the jobs must end (SIGTERM, then
    # SIGKILL after KillWait=10 s) before the daemons are stopped.
    for _ in $(seq 1 300); do
        any_job_alive || [ -n "$(squeue -h -o %A 2>/dev/null)" ] || break
        sleep 0.1
    done
    for f in slurmd slurmctld munged; do [ -e "$pids/$f.pid" ] && stop "$pids/$f.pid"; done
    # Everything this script started or saw started for it.
    for f in "$pids"/*.pid; do
        [ -e "$f" ] || continue
        if alive "$f"; then
            left+=("$(basename "$f" .pid) (pid $(cut -d' ' -f1 "$f"))")
            kill -KILL "$(cut -d' ' -f1 "$f")" 2>/dev/null
        fi
    done
    if [ "${#left[@]}" -gt 0 ]; then
        banner "SLURM TEST FAILED: processes left running after the test (now killed)" "${left[@]}"
        rc=1
    else
        log "no recorded process left running ($(ls "$pids" | wc -l) PID files checked)"
    fi
    if [ "$rc" -ne 0 ] && [ "$rc" -ne 77 ]; then
        for f in "$scratch"/log/*.log; do
            [ -e "$f" ] && { echo "--- tail of $f" >&2; tail -n 15 "$f" >&2; }
        done
    fi
    if [ "$rc" -eq 0 ] && [ "${IQAUDIT_SLURM_KEEP:-0}" != 1 ]; then
        rm -rf "$scratch"
    else
        log "scratch folder kept: $scratch"
    fi
    exit "$rc"
}
trap teardown EXIT
trap 'exit 130' INT
trap 'exit 143' TERM

# --- 1. configuration ------------------------------------------------------------

host=$(uname -n)
host=${host%%.*} # the short name, as slurmd looks itself up
cpus=$(nproc)
mem_mb=$(awk '/^MemTotal:/ {print int($2 / 1024 * 0.9)}' /proc/meminfo)

# Two free TCP ports for slurmctld and slurmd (nothing answers on 127.0.0.1).
port_free() { ! (exec 3<>"/dev/tcp/127.0.0.1/$1") 2>/dev/null; }
ports=()
for p in $(seq 16817 16917); do
    port_free "$p" && ports+=("$p")
    [ "${#ports[@]}" -eq 2 ] && break
done
[ "${#ports[@]}" -eq 2 ] || cannot "no two free TCP ports in 16817-16917 on 127.0.0.1"

conf="$scratch/slurm.conf"
cat >"$conf" <<EOF
ClusterName=iqaudit-test
SlurmctldHost=$host(127.0.0.1)
SlurmctldPort=${ports[0]}
SlurmdPort=${ports[1]}
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket=$scratch/munge/munge.socket
StateSaveLocation=$scratch/state
SlurmdSpoolDir=$scratch/spool
SlurmctldPidFile=$scratch/slurmctld.pid
SlurmdPidFile=$scratch/slurmd.pid
SlurmctldLogFile=$scratch/log/slurmctld.log
SlurmdLogFile=$scratch/log/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
SlurmdParameters=config_overrides
ReturnToService=2
MpiDefault=none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
KillWait=10
MailProg=/bin/true
NodeName=$host NodeAddr=127.0.0.1 CPUs=$cpus RealMemory=$mem_mb State=UNKNOWN
PartitionName=main Nodes=$host Default=YES MaxTime=INFINITE State=UP
EOF
export SLURM_CONF="$conf"

# --- 2. daemons -------------------------------------------------------------------

# daemon NAME CMD...: run CMD in the foreground of its own session and record
# its PID. Its own session: a Ctrl-C or a CI timeout sent to this script's
# process group must not kill the daemons under running jobs; the trap stops
# them in order. setsid execs CMD (a background job of a script is no process
# group leader), so $! is the daemon itself.
daemon() {
    local name=$1
    shift
    setsid "$@" &
    record "$name" $!
}

# munge: its own key, socket, log, seed and PID file in the scratch folder, so a
# system munged (if any) is neither used nor disturbed.
key="$scratch/munge/munge.key"
dd if=/dev/urandom of="$key" bs=1024 count=1 status=none
chmod 400 "$key"
chmod 755 "$scratch/munge"
daemon munged munged --foreground --force \
    --key-file="$key" \
    --socket="$scratch/munge/munge.socket" \
    --pid-file="$scratch/munge/munged.pid" \
    --log-file="$scratch/log/munged.log" \
    --seed-file="$scratch/munge/munged.seed" \
    >>"$scratch/log/munged.log" 2>&1
cluster_up=1
for _ in $(seq 1 100); do
    [ -S "$scratch/munge/munge.socket" ] && break
    alive "$pids/munged.pid" || break
    sleep 0.1
done
munge -n -S "$scratch/munge/munge.socket" 2>/dev/null |
    unmunge -S "$scratch/munge/munge.socket" >/dev/null 2>&1 ||
    cannot "munged did not start or does not answer on its socket; its log ends:" \
        "$(tail -n 3 "$scratch/log/munged.log" 2>/dev/null)"

daemon slurmctld slurmctld -D -f "$conf" >>"$scratch/log/slurmctld.out.log" 2>&1
daemon slurmd slurmd -D -f "$conf" >>"$scratch/log/slurmd.out.log" 2>&1

t_up=$(date +%s.%N)
state=
for _ in $(seq 1 600); do
    alive "$pids/slurmctld.pid" || cannot "slurmctld exited at start; its log ends:" \
        "$(tail -n 4 "$scratch/log/slurmctld.log" "$scratch/log/slurmctld.out.log" 2>/dev/null)"
    alive "$pids/slurmd.pid" || cannot "slurmd exited at start (cgroup or spool problem?); its log ends:" \
        "$(tail -n 4 "$scratch/log/slurmd.log" "$scratch/log/slurmd.out.log" 2>/dev/null)"
    state=$(sinfo -h -n "$host" -o %T 2>/dev/null || true)
    [ "$state" = idle ] && break
    sleep 0.1
done
[ "$state" = idle ] || cannot "node $host not idle 60 s after starting slurmd (state '${state:-none}')" \
    "$(tail -n 4 "$scratch/log/slurmd.log" 2>/dev/null)"
log "node $host idle after $(awk -v a="$t_up" -v b="$(date +%s.%N)" 'BEGIN {printf "%.1f", b - a}') s" \
    "($cpus CPUs; slurmctld :${ports[0]}, slurmd :${ports[1]})"

# From here on, a failure is the test's, not the machine's.

# --- 3. captures and the single-machine reference ---------------------------------

field="$scratch/field"
prof="$scratch/link.profile.json"
"$bin" profile new --payload-symbols 200 >"$prof"
synth() { # synth REL SEED ESN0 [extra synth options]
    local rel=$1 seed=$2 esn0=$3
    shift 3
    mkdir -p "$(dirname "$field/$rel")"
    "$bin" synth --profile "$prof" --out "$field/$rel" --bursts 200 --gap 200:600 \
        --seed "$seed" --esn0-db "$esn0" "$@" 2>/dev/null
}
n=0
for i in $(seq 1 26); do # within limits (Es/N0 30 dB: EVM about 3 %)
    case $((i % 3)) in
        0) synth "quay-a/crane-$i.ci16" "$i" 30 ;;
        1) synth "quay-b/crane-$i.cf32" "$i" 30 --format cf32_le ;;
        2) synth "quay-b/2026-03-14/uplink-$i.ci16" "$i" 30 --cfo-hz 1200 ;;
    esac
    n=$((n + 1))
done
for i in $(seq 1 8); do # limit failures (Es/N0 14 dB: EVM about 19 % > 12.5 %)
    synth "quay-a/noisy-$i.ci16" $((100 + i)) 14
    n=$((n + 1))
done
synth "quay b/odd, \"name\".ci16" 200 30 # CSV quoting and a space in a folder name
n=$((n + 1))
for i in 1 2 3; do # noise only: no training block
    head -c 200000 /dev/urandom >"$field/quay-a/noise-$i.ci16"
    n=$((n + 1))
done
for i in 1 2 3; do # unreadable: empty
    : >"$field/quay-b/empty-$i.cf32"
    n=$((n + 1))
done
for i in 1 2; do # unreadable: a link to nothing
    ln -s "$scratch/nowhere-$i.wav" "$field/quay-a/lost-$i.wav"
    n=$((n + 1))
done
cp "$field/quay-a/crane-3.ci16" "$field/quay-a/bad-meta.sigmf-data" # unreadable: bad sidecar
echo '{"global": ' >"$field/quay-a/bad-meta.sigmf-meta"
n=$((n + 1))
log "$n captures in $field ($(du -sh "$field" | cut -f1))"

t0=$(date +%s.%N)
set +e
"$bin" batch "$field" --profile "$prof" --out "$scratch/ref" --jobs "$cpus" --quiet \
    2>"$scratch/ref.log"
ref_rc=$?
set -e
t_ref=$(awk -v a="$t0" -v b="$(date +%s.%N)" 'BEGIN {printf "%.2f", b - a}')
[ "$ref_rc" -eq 2 ] || fail "reference batch exited $ref_rc, expected 2 (unreadable files)" \
    "$(cat "$scratch/ref.log")"
rows=$(wc -l <"$scratch/ref/summary.jsonl")
[ "$rows" -eq "$n" ] || fail "reference summary has $rows rows for $n captures"
for v in pass fail no-training unreadable; do
    grep -q "\"verdict\":\"$v\"" "$scratch/ref/summary.jsonl" ||
        fail "the reference summary has no '$v' row; the folder does not cover what it should"
done
log "reference: $(tail -n1 "$scratch/ref.log")"

# --- 4. the scripts of docs/scaling.md -------------------------------------------

work="$scratch/work"
extract() { # extract NAME: the ```sh block after the marker line naming NAME
    awk -v name="$1" '
        index($0, "<!-- slurm-script: " name " ") == 1 { marked = 1; next }
        marked && !inside && /^```sh$/ { inside = 1; next }
        inside && /^```$/ { exit }
        inside { print }
    ' "$repo/docs/scaling.md"
}
for s in iqaudit-array.sh iqaudit-merge.sh; do
    extract "$s" >"$work/$s"
    [ "$(head -n1 "$work/$s")" = '#!/bin/bash' ] ||
        fail "docs/scaling.md: no '<!-- slurm-script: $s' block starting with #!/bin/bash"
    bash -n "$work/$s" || fail "docs/scaling.md: $s is not valid bash"
done
grep -q -- '--shard "${SLURM_ARRAY_TASK_ID}/${shards}"' "$work/iqaudit-array.sh" ||
    fail "iqaudit-array.sh no longer takes its shard from SLURM_ARRAY_TASK_ID"

# `iqaudit` on the jobs' PATH: a wrapper that records the job's processes (the
# slurmstepd, the job shell, and itself, which becomes iqaudit by exec).
cat >"$scratch/bin/iqaudit" <<EOF
#!/bin/sh
st() { s=\$(cat /proc/\$1/stat) && s=\${s##*) } && set -- \$s && echo "\${20}"; }
parent() { s=\$(cat /proc/\$1/stat) && s=\${s##*) } && set -- \$s && echo "\$2"; }
gp=\$(parent \$PPID)
echo "\$\$ \$(st \$\$)" >"$pids/job-iqaudit-\$\$.pid"
echo "\$PPID \$(st \$PPID)" >"$pids/job-shell-\$PPID.pid"
[ -n "\$gp" ] && [ "\$gp" -gt 1 ] && echo "\$gp \$(st \$gp)" >"$pids/job-stepd-\$gp.pid"
exec "$bin" "\$@"
EOF
chmod 755 "$scratch/bin/iqaudit"

cd "$work"
export PATH="$scratch/bin:$PATH"
export IQAUDIT_IN="$field" IQAUDIT_PROFILE="$prof" IQAUDIT_SHARDS=4
# The doc's sizes are for a real cluster node; this node has $cpus CPUs.
small=(--cpus-per-task=1 --mem=512M --time=00:20:00)

now() { date +%s.%N; }
since() { awk -v a="$1" -v b="$(now)" 'BEGIN {printf "%.2f", b - a}'; }

# queued JOB: the job (or array) still has a task pending, running or completing.
queued() { [ -n "$(squeue -h -j "$1" -o %T 2>/dev/null)" ]; }

wait_gone() { # wait_gone JOB WHAT: until nothing of JOB is queued (15 min cap)
    local i
    for i in $(seq 1 9000); do
        queued "$1" || return 0
        sleep 0.1
    done
    fail "$2 (job $1) still queued after 15 min"
}

same_as_reference() { # same_as_reference OUT: merged summaries equal the reference
    local f
    for f in summary.jsonl summary.csv; do
        cmp -s "$scratch/ref/$f" "$1/$f" || return 1
    done
}

task_log() { echo "$work/logs/iqaudit-$1_$2.log"; }

# --- round 1: the whole array, then the dependent merge --------------------------

export IQAUDIT_OUT="$scratch/out-array"
t0=$(now)
array=$(sbatch --parsable --array=1-4 "${small[@]}" iqaudit-array.sh)
merge_job=$(sbatch --parsable --dependency="afterany:$array" iqaudit-merge.sh)
log "round 1: array $array (4 tasks), merge $merge_job after it"
wait_gone "$array" "the 4-task array"
t_array=$(since "$t0")
wait_gone "$merge_job" "merge job"
merge_rc=$(scontrol show job "$merge_job" | sed -n 's/.* ExitCode=\([0-9]*\):.*/\1/p' | head -n1)
for k in 1 2 3 4; do
    f=$(task_log "$array" "$k")
    [ -f "$f" ] || fail "array task $k wrote no log $f"
    grep -q '^batch: .* captures: ' "$f" || fail "array task $k did not finish: $(tail -n 3 "$f")"
    log "  task $k: $(tail -n 1 "$f" | sed 's/; summary .*//')"
done
[ "$merge_rc" = 2 ] || fail "merge job exited '${merge_rc}', expected 2 (unreadable rows):" \
    "$(cat "$work"/logs/iqaudit-"$merge_job"-merge.log)"
same_as_reference "$IQAUDIT_OUT" || fail "round 1: merged summary differs from the single-machine batch" \
    "$(diff "$scratch/ref/summary.jsonl" "$IQAUDIT_OUT/summary.jsonl" | head -n 6)"
log "round 1: merged summary.jsonl and summary.csv are byte-identical to the single-machine batch" \
    "(4-task array ${t_array} s from submission to the last task's end)"

# --- round 2: cancel a running task, afterany merge, re-submit, merge again -----

export IQAUDIT_OUT="$scratch/out-cancel"
array=$(sbatch --parsable --array=1-4 "${small[@]}" iqaudit-array.sh)
f=$(task_log "$array" 1)
log "round 2: array $array; cancelling task 1 after its first analysed capture"
for i in $(seq 1 3000); do
    grep -Eq ' \[[0-9]+/[0-9]+\]$' "$f" 2>/dev/null && break
    queued "${array}_1" || break
    sleep 0.02
done
grep -Eq ' \[[0-9]+/[0-9]+\]$' "$f" 2>/dev/null || fail "task 1 ended or never reported a finished capture"
scancel "${array}_1"
merge_job=$(sbatch --parsable --dependency="afterany:$array" iqaudit-merge.sh)
wait_gone "$array" "the array"
wait_gone "$merge_job" "merge job"
# The cancelled task's iqaudit writes its summary on SIGTERM before exiting;
# the job ends only when every process of it has.
tail_line=$(tail -n 1 "$f")
case $tail_line in
    *"interrupted by SIGTERM"*) ;;
    *) fail "task 1 was not interrupted mid-run by scancel; its log ends: $tail_line" ;;
esac
log "  task 1: ${tail_line%%; summary *}"
partial="$IQAUDIT_OUT/summary.shard-1-of-4.jsonl"
[ -f "$partial" ] || fail "the cancelled task wrote no shard summary"
done_rows=$(wc -l <"$partial")
reported=$(grep -c '"report":"' "$partial" || true)
not_started=$(echo "$tail_line" | sed -n 's/.*interrupted by SIGTERM, \([0-9]*\) of .*/\1/p')
[ "${not_started:-0}" -gt 0 ] || fail "the cancelled task left no capture unstarted"
[ "$(wc -l <"$IQAUDIT_OUT/summary.jsonl")" -eq $((n - not_started)) ] ||
    fail "the afterany merge after the cancel has $(wc -l <"$IQAUDIT_OUT/summary.jsonl") rows," \
        "expected $n minus the $not_started captures task 1 never started"
log "  the afterany merge ran after the cancel and holds $((n - not_started)) of $n rows," \
    "as documented (task 1 finished $done_rows captures, $reported with reports)"

resub=$(sbatch --parsable --array=1 "${small[@]}" iqaudit-array.sh)
merge_job=$(sbatch --parsable --dependency="afterany:$resub" iqaudit-merge.sh)
wait_gone "$resub" "the re-submitted task"
wait_gone "$merge_job" "merge job"
f=$(task_log "$resub" 1)
tail_line=$(tail -n 1 "$f")
log "  re-submitted task 1: ${tail_line%%; summary *}"
case $tail_line in
    *" $reported skipped (report up to date)"*) ;;
    *) fail "the re-submitted task did not skip exactly the $reported captures reported before the cancel:" \
        "$tail_line" ;;
esac
case $tail_line in
    *" 0 analysed,"*) fail "the re-submitted task analysed nothing: $tail_line" ;;
esac
reused=$(grep -c ' (report up to date, not re-run) \[[0-9]*/[0-9]*\]$' "$f" || true)
[ "$reused" -eq "$reported" ] ||
    fail "the re-submitted task printed $reused 'not re-run' lines for $reported reported captures"
same_as_reference "$IQAUDIT_OUT" || fail "round 2: merged summary after the re-submission differs from" \
    "the single-machine batch: $(diff "$scratch/ref/summary.jsonl" "$IQAUDIT_OUT/summary.jsonl" | head -n 6)"
log "round 2: after cancel + re-submit the merged summaries are byte-identical to the single-machine batch"

# --- timing: one task over the whole folder -----------------------------------------

one_task() { # one_task CPUS: seconds for --array=1 with IQAUDIT_SHARDS=1
    local j t
    export IQAUDIT_OUT="$scratch/out-one-$1" IQAUDIT_SHARDS=1
    t=$(now)
    j=$(sbatch --parsable --array=1 --cpus-per-task="$1" --mem=512M --time=00:20:00 iqaudit-array.sh)
    wait_gone "$j" "the one-task run"
    since "$t"
    for f in jsonl csv; do
        cmp -s "$scratch/ref/summary.$f" "$IQAUDIT_OUT/summary.shard-1-of-1.$f" ||
            fail "one task over the whole folder: summary.shard-1-of-1.$f differs from the reference"
    done
}
t_one1=$(one_task 1)
t_one2=$(one_task "$cpus")

banner "SLURM TEST PASSED ($(slurmctld -V), $n captures, $(du -sh "$field" | cut -f1), $cpus CPUs)" \
    "load average at the end (1, 5, 15 min): $(cut -d" " -f1-3 /proc/loadavg)" \
    "single-machine iqaudit batch --jobs $cpus:      ${t_ref} s" \
    "4-task array, 1 CPU per task (submit->end): ${t_array} s" \
    "1 task, 1 CPU, whole folder (submit->end):  ${t_one1} s" \
    "1 task, $cpus CPUs, whole folder (submit->end): ${t_one2} s" \
    "checks: merged summary.jsonl/.csv byte-identical after the array, and after cancel + re-submit;" \
    "        one-task summary identical; the re-run skipped the $reported captures already reported"
