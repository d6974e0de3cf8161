#!/usr/bin/env bash
# End-to-end test of deploy/slurm on a real Slurm: starts a private single-node cluster (munged,
# slurmctld, slurmd from a temporary directory, no cgroups, no accounting), then drives the job
# scripts through deploy/slurm/submit.sh, changing nothing but environment variables:
#
#   1. coordinated: coordinator job + worker array; the array is cancelled mid-way (scancel, as
#      a preemption would), submitted again, and the sweep completes;
#   2. static shards: shard array cancelled mid-way (its merge job dies with the dependency),
#      submitted again with a new merge job, which also writes the report;
#   3. one allocation: coordinator and workers in a single job.
#
# Each final store must be identical to `bbmx run` of the same sweep: same sha256 of the records
# exported as CSV. Prints one PASS or FAIL line at the end; cleans up (daemons, temp files) on any
# exit. Needs root (it installs slurm-wlm and munge with apt-get if they are missing) and Go.
#
# The sweep is examples/quick.toml with the horizon, replicates and task size changed so the
# sweep lasts long enough (about 30 CPU-seconds in 9 or so tasks) to be interrupted mid-way.
set -euo pipefail

repo=$(cd "$(dirname "${BASH_SOURCE[0]}")/../../.." && pwd)
slurm_dir=$repo/deploy/slurm
step_timeout=${E2E_STEP_TIMEOUT:-240} # seconds any one wait may take
started=$SECONDS

T=$(mktemp -d /tmp/bbmx-slurm-e2e.XXXXXX)
chmod 0755 "$T" # munged checks the path to its socket
passed=0

log() { echo "e2e [$((SECONDS - started))s] $*"; }

dump_logs() {
	echo "---- logs (last lines) ----"
	for f in "$T"/slurm/*.log "$T"/*/bbmx-*.out; do
		[[ -f $f ]] || continue
		echo "== $f"
		tail -n 25 "$f"
	done
}

cleanup() {
	local rc=$?
	set +e
	if [[ $passed != 1 ]]; then
		dump_logs
		echo "FAIL: deploy/slurm end-to-end (see the messages above; $((SECONDS - started))s)"
		rc=1
	fi
	if [[ -f $T/slurm/slurm.conf ]]; then
		SLURM_CONF=$T/slurm/slurm.conf scancel --quiet --user="$(id -un)" 2>/dev/null
		sleep 2
	fi
	for pidfile in "$T"/slurm/slurmd.pid "$T"/slurm/slurmctld.pid "$T"/munge/munged.pid; do
		[[ -f $pidfile ]] && kill "$(cat "$pidfile")" 2>/dev/null
	done
	sleep 1
	# Anything still running our private binary (a job step that outlived its daemon).
	for p in /proc/[0-9]*; do
		[[ $(readlink "$p/exe" 2>/dev/null) == "$T/bin/bbmx" ]] && kill -9 "${p#/proc/}" 2>/dev/null
	done
	for pidfile in "$T"/slurm/slurmd.pid "$T"/slurm/slurmctld.pid "$T"/munge/munged.pid; do
		[[ -f $pidfile ]] && kill -9 "$(cat "$pidfile")" 2>/dev/null
	done
	rm -rf "$T"
	exit "$rc"
}
trap cleanup EXIT
trap 'exit 130' INT TERM

fail() {
	echo "e2e: $*" >&2
	exit 1
}

# ---- prerequisites ----
if ! command -v slurmctld >/dev/null || ! command -v slurmd >/dev/null || ! command -v sbatch >/dev/null || ! command -v munged >/dev/null; then
	log "installing slurm-wlm and munge"
	export DEBIAN_FRONTEND=noninteractive
	apt-get update -qq
	apt-get install -y -qq slurm-wlm munge >/dev/null
fi
command -v go >/dev/null || fail "go is not on PATH"

log "building bbmx"
mkdir -p "$T/bin"
(cd "$repo" && go build -o "$T/bin/bbmx" ./cmd/bbmx)
BBMX=$T/bin/bbmx

free_port() { python3 -c 'import socket; s=socket.socket(); s.bind(("127.0.0.1",0)); print(s.getsockname()[1])'; }

# ---- a private single-node Slurm ----
log "starting munged, slurmctld, slurmd"
node=$(hostname -s)
mkdir -p "$T/munge" "$T/slurm/state" "$T/slurm/spool"
chmod 0700 "$T/munge"
head -c 1024 /dev/urandom >"$T/munge/munge.key"
chmod 0600 "$T/munge/munge.key"
munged --force --socket="$T/munge/sock" --key-file="$T/munge/munge.key" --pid-file="$T/munge/munged.pid" \
	--log-file="$T/munge/munged.log" --seed-file="$T/munge/seed"
cat >"$T/slurm/slurm.conf" <<EOF
ClusterName=bbmxe2e
SlurmctldHost=$node(127.0.0.1)
SlurmUser=$(id -un)
SlurmdUser=$(id -un)
SlurmctldPort=$(free_port)
SlurmdPort=$(free_port)
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket=$T/munge/sock
StateSaveLocation=$T/slurm/state
SlurmdSpoolDir=$T/slurm/spool
SlurmctldPidFile=$T/slurm/slurmctld.pid
SlurmdPidFile=$T/slurm/slurmd.pid
SlurmctldLogFile=$T/slurm/slurmctld.log
SlurmdLogFile=$T/slurm/slurmd.log
PlugStackConfig=$T/slurm/plugstack.conf
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
MpiDefault=none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
SlurmdParameters=config_overrides
ReturnToService=2
MinJobAge=600
KillWait=15
NodeName=$node NodeAddr=127.0.0.1 CPUs=8 State=UNKNOWN
PartitionName=e2e Nodes=$node Default=YES MaxTime=INFINITE State=UP
EOF
: >"$T/slurm/plugstack.conf"
export SLURM_CONF=$T/slurm/slurm.conf
slurmctld -f "$SLURM_CONF"
slurmd -f "$SLURM_CONF"
for _ in $(seq 30); do
	[[ $(sinfo -h -o %T 2>/dev/null) == idle ]] && break
	sleep 1
done
[[ $(sinfo -h -o %T) == idle ]] || fail "the node did not come up: $(sinfo 2>&1)"

# ---- the sweep and the reference ----
sweep=$T/sweep.toml
sed -e 's/^horizons = .*/horizons = [7]/' -e 's/^replicates = .*/replicates = 20000/' \
	-e 's/^# task_seconds = .*/task_seconds = 1/' "$repo/examples/quick.toml" >"$sweep"
grep -q '^horizons = \[7\]' "$sweep" && grep -q '^replicates = 20000' "$sweep" && grep -q '^task_seconds = 1' "$sweep" ||
	fail "examples/quick.toml changed shape: cannot derive the test sweep from it"

digest() { # sha256 of a store's records exported as CSV
	"$BBMX" export "$1" --format csv --out "$1.csv" >/dev/null
	sha256sum "$1.csv" | cut -d' ' -f1
}

log "checking that the export digest is deterministic"
"$BBMX" sim --horizon 3 --replicates 20 --seed 5 --store "$T/sim-a.db" >/dev/null
"$BBMX" sim --horizon 3 --replicates 20 --seed 5 --store "$T/sim-b.db" >/dev/null
[[ $(digest "$T/sim-a.db") == "$(digest "$T/sim-b.db")" ]] || fail "two identical bbmx sim stores export differently"

log "reference: bbmx run of the sweep"
"$BBMX" run "$sweep" --store "$T/reference.db" --threads 2 --no-report >"$T/reference.out" 2>&1 || {
	cat "$T/reference.out"
	fail "bbmx run failed"
}
want=$(digest "$T/reference.db")
total=$("$BBMX" status --store "$T/reference.db" | sed -n 's/.* \([0-9][0-9]*\)\/\([0-9][0-9]*\) replicates.*/\2/p' | head -n1)
[[ $total =~ ^[0-9]+$ ]] || fail "cannot read the replicate count from bbmx status"
log "reference digest $want ($total records)"

# ---- helpers ----
# job_after WORDS OUTPUT: the job id submit.sh reported after WORDS ("coordinator job 12, ...").
job_after() { sed -n "s/.*$1 \([0-9][0-9]*\).*/\1/p" <<<"$2" | head -n1; }

# wait_done JOBID...: until none is pending or running.
wait_done() {
	local deadline=$((SECONDS + step_timeout)) ids
	ids=$(
		IFS=,
		echo "$*"
	)
	while [[ -n $(squeue -h -j "$ids" -o %i 2>/dev/null) ]]; do
		((SECONDS < deadline)) || fail "jobs $* still running after ${step_timeout}s: $(squeue 2>&1)"
		sleep 1
	done
}

# states JOBID: the JobState and ExitCode of the job (every task of an array), one per line.
states() { scontrol -o show job "$1" | grep -o 'JobState=[A-Z_]* .*ExitCode=[0-9:]*' | sed 's/ .*ExitCode=/ /'; }

expect_completed() {
	local bad
	bad=$(states "$1" | grep -v '^JobState=COMPLETED 0:0$' || true)
	[[ -z $bad ]] || fail "job $1 ($2) did not complete cleanly: $bad"
}

# status_done ADDRFILE: replicates done so far, asked of the running coordinator.
status_done() {
	local out
	out=$("$BBMX" status --coordinator "$(cat "$1")" --token-file "$BBMX_SECRETS/token" \
		--tls-ca "$BBMX_SECRETS/ca.crt" --tls-server-name bbmx-coordinator \
		--tls-cert "$BBMX_SECRETS/client.crt" --tls-key "$BBMX_SECRETS/client.key" 2>/dev/null) || return 1
	sed -n 's/.* \([0-9][0-9]*\)\/\([0-9][0-9]*\) replicates.*/\1/p' <<<"$out" | head -n1
}

export BBMX BBMX_YES=1 BBMX_PORT=0 BBMX_THREADS=1 BBMX_GRACE=10s BBMX_WAIT=2m BBMX_LEASE=10s
export BBMX_SBATCH_ARGS="--time=15" BBMX_WORKER_SBATCH_ARGS="--cpus-per-task=1"

# ---- 1. coordinated, with the worker array cancelled and resubmitted ----
log "coordinated: submitting coordinator and 2 workers (mutual TLS)"
export BBMX_DIR=$T/coordinated BBMX_SECRETS=$T/coordinated/secrets BBMX_SWEEP=$sweep BBMX_TLS=mutual
out=$("$slurm_dir/submit.sh" coordinated 2)
echo "$out"
coord=$(job_after "coordinator job" "$out")
array=$(job_after "worker array" "$out")
[[ -n $coord && -n $array ]] || fail "could not read the job ids from submit.sh"

deadline=$((SECONDS + step_timeout))
done_before=0
while :; do
	((SECONDS < deadline)) || fail "no replicate done after ${step_timeout}s"
	if [[ -s $BBMX_DIR/coordinator.address ]]; then
		done_before=$(status_done "$BBMX_DIR/coordinator.address" || echo 0)
		((${done_before:-0} > 0)) && break
	fi
	sleep 0.5
done
log "coordinated: $done_before of $total replicates done; cancelling the worker array $array"
scancel "$array"
wait_done "$array"
after=$(status_done "$BBMX_DIR/coordinator.address") || fail "coordinator did not answer after the workers were cancelled"
log "coordinated: $after of $total replicates done after the cancel"
((after < total)) || fail "the sweep finished before the cancel took effect: nothing was tested (make the sweep longer)"
grep -q 'stopped by signal' "$BBMX_DIR"/bbmx-worker-"$array"_*.out ||
	fail "no worker reported a clean stop on the scheduler's TERM"

log "coordinated: resubmitting the worker array"
out=$("$slurm_dir/submit.sh" workers 2)
echo "$out"
array2=$(job_after "worker array" "$out")
[[ -n $array2 ]] || fail "could not read the job id of the resubmitted array"
wait_done "$coord" "$array2"
expect_completed "$coord" "coordinator"
expect_completed "$array2" "resubmitted workers"
got=$(digest "$BBMX_DIR/store.db")
[[ $got == "$want" ]] || fail "coordinated store differs from bbmx run: $got != $want"
log "coordinated: identical to bbmx run"

# ---- 2. static shards, cancelled mid-way and resubmitted, then merged ----
log "shards: submitting 3 shards and the merge job"
export BBMX_DIR=$T/shards BBMX_SECRETS=$T/shards/secrets
out=$("$slurm_dir/submit.sh" shards 3)
echo "$out"
array=$(job_after "shard array" "$out")
merge=$(job_after "merge job" "$out")
[[ -n $array && -n $merge ]] || fail "could not read the job ids from submit.sh"
# A shard store grows past a megabyte when its first task's records are committed (the store
# itself is locked while its shard runs, so its size is what can be watched from outside).
deadline=$((SECONDS + step_timeout))
until find "$BBMX_DIR/shards" -name 'shard-*-of-3.db' -size +1M 2>/dev/null | grep -q .; do
	((SECONDS < deadline)) || fail "no shard committed anything after ${step_timeout}s"
	sleep 0.2
done
log "shards: cancelling the shard array $array"
scancel "$array"
wait_done "$array" "$merge"
[[ ! -e $BBMX_DIR/store.db ]] || fail "the merge ran although its shards were cancelled"
partial=0
for f in "$BBMX_DIR"/shards/shard-*-of-3.db; do
	[[ -f $f ]] || continue
	n=$("$BBMX" status --store "$f" | sed -n 's/.* \([0-9][0-9]*\)\/\([0-9][0-9]*\) replicates.*/\1/p')
	partial=$((partial + ${n:-0}))
done
log "shards: $partial of $total replicates in the shard stores after the cancel"
((partial > 0 && partial < total)) || fail "the cancel did not come mid-way ($partial of $total done): nothing was tested"

log "shards: resubmitting shards and merge"
out=$("$slurm_dir/submit.sh" shards 3)
echo "$out"
array=$(job_after "shard array" "$out")
merge=$(job_after "merge job" "$out")
wait_done "$array" "$merge"
expect_completed "$array" "resubmitted shards"
expect_completed "$merge" "merge"
got=$(digest "$BBMX_DIR/store.db")
[[ $got == "$want" ]] || fail "merged shard store differs from bbmx run: $got != $want"
log "shards: identical to bbmx run"
[[ -n $(ls -A "$BBMX_DIR/report" 2>/dev/null) ]] || fail "the merge job wrote no report into $BBMX_DIR/report"

# ---- 3. one allocation ----
log "allocation: coordinator and worker in one job (TLS without client certificates)"
export BBMX_DIR=$T/allocation BBMX_SECRETS=$T/allocation/secrets BBMX_TLS=on BBMX_THREADS=2
out=$("$slurm_dir/submit.sh" allocation 1)
echo "$out"
job=$(job_after "sweep job" "$out")
[[ -n $job ]] || fail "could not read the job id from submit.sh"
wait_done "$job"
expect_completed "$job" "allocation"
got=$(digest "$BBMX_DIR/store.db")
[[ $got == "$want" ]] || fail "allocation store differs from bbmx run: $got != $want"
log "allocation: identical to bbmx run"

passed=1
echo "PASS: deploy/slurm end-to-end: coordinated (worker array cancelled and resubmitted), shards (cancelled, resubmitted, merged) and one allocation all equal bbmx run (records sha256 $want) in $((SECONDS - started))s"
