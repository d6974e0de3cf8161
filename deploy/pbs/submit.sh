#!/usr/bin/env bash
# Submits a bbmx sweep to PBS (OpenPBS / PBS Pro) through the job scripts next to this file,
# after showing the cost estimate of `bbmx plan` (and asking, when run on a terminal). Run it
# from the shared working directory: the store, the address file, the secrets and the logs go there.
#
#   submit.sh coordinated [WORKERS]  coordinator job + worker array (default 4 workers)
#   submit.sh workers [WORKERS]      the worker array again (after wall-time expiry or preemption)
#   submit.sh coordinator            the coordinator again (it resumes from the store)
#   submit.sh shards [N]             static shards (default 8) + a merge job after all succeed
#
# Settings (environment): BBMX_SWEEP (required for all but workers), BBMX, BBMX_DIR,
# BBMX_QSUB_ARGS (extra qsub options for every job, e.g. "-q long -A lab"), BBMX_WALLTIME
# (HH:MM:SS for worker and shard jobs; the jobs then stop cleanly 120 s before it), BBMX_YES=1
# (do not ask), BBMX_FORCE=1 (let bbmx plan pass a sweep it finds absurd), and the settings each
# job script lists at its top, which qsub -V passes on.
set -euo pipefail

here=$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)
# shellcheck source=../submit-common.sh
source "$here/../submit-common.sh"
BBMX_QSUB_ARGS=${BBMX_QSUB_ARGS:-}
BBMX_WALLTIME=${BBMX_WALLTIME:-}

# qsub_id submits with the environment (-V) and prints the job id.
qsub_id() {
	# shellcheck disable=SC2086 # BBMX_QSUB_ARGS is a list of options
	qsub -V $BBMX_QSUB_ARGS "$@" || die "qsub $* failed"
}

# set_walltime: wt holds -l walltime=... and BBMX_STOP_AFTER is 120 s before it, when
# BBMX_WALLTIME is set.
wt=()
set_walltime() {
	[[ -n $BBMX_WALLTIME ]] || return 0
	[[ $BBMX_WALLTIME =~ ^([0-9]+):([0-5][0-9]):([0-5][0-9])$ ]] || die "BBMX_WALLTIME must be HH:MM:SS, not '$BBMX_WALLTIME'"
	local s=$((10#${BASH_REMATCH[1]} * 3600 + 10#${BASH_REMATCH[2]} * 60 + 10#${BASH_REMATCH[3]}))
	((s > 300)) || die "BBMX_WALLTIME must be more than 5 minutes"
	export BBMX_STOP_AFTER=$((s - 120))
	wt=(-l "walltime=$BBMX_WALLTIME")
}

# array_args N: -J 0-(N-1), or nothing for one job (PBS arrays need two subjobs at least).
array_args() { (($1 == 1)) || echo "-J 0-$(($1 - 1))"; }

mode=${1:-}
[[ -n $mode ]] || usage
mkdir -p "$BBMX_DIR"
cd "$BBMX_DIR"
set_walltime
case $mode in
coordinated)
	workers=$(count "${2:-}" 4 WORKERS)
	plan
	secrets
	coord=$(qsub_id "$here/coordinator.pbs")
	# shellcheck disable=SC2046 # array_args is empty or two words
	array=$(qsub_id -W depend="after:$coord" $(array_args "$workers") "${wt[@]}" "$here/workers.pbs")
	echo "coordinator job $coord, worker array $array ($workers workers)"
	echo "watch: qstat -t $coord $array   and   $BBMX status --coordinator \$(cat $BBMX_DIR/coordinator.address) --token-file $BBMX_SECRETS/token --tls-ca $BBMX_SECRETS/ca.crt --tls-server-name bbmx-coordinator"
	;;
workers)
	workers=$(count "${2:-}" 4 WORKERS)
	# shellcheck disable=SC2046 # array_args is empty or two words
	array=$(qsub_id $(array_args "$workers") "${wt[@]}" "$here/workers.pbs")
	echo "worker array $array ($workers workers)"
	;;
coordinator)
	absolute_sweep
	secrets
	coord=$(qsub_id "$here/coordinator.pbs")
	echo "coordinator job $coord"
	;;
shards)
	shards=$(count "${2:-}" 8 SHARDS)
	export BBMX_SHARDS=$shards
	plan
	# shellcheck disable=SC2046 # array_args is empty or two words
	array=$(qsub_id $(array_args "$shards") "${wt[@]}" "$here/shards.pbs")
	merge=$(qsub_id -W depend="afterok:$array" "$here/merge.pbs")
	echo "shard array $array ($shards shards), merge job $merge"
	;;
*) usage ;;
esac
