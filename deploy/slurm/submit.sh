#!/usr/bin/env bash
# Submits a bbmx sweep to Slurm through the job scripts next to this file, after showing the
# cost estimate of `bbmx plan` (and asking, when run on a terminal). Run it from the shared
# working directory: the store, the address file, the secrets and the job logs go there.
#
#   submit.sh coordinated [WORKERS]  coordinator job + worker array (default 4 workers)
#   submit.sh workers [WORKERS]      the worker array again (after wall-time expiry or preemption)
#   submit.sh coordinator            the coordinator again (it resumes from the store)
#   submit.sh allocation [NODES]     coordinator and workers in one allocation (default 2 nodes)
#   submit.sh shards [N]             static shards (default 8) + a merge job after all succeed
#
# Settings (environment): BBMX_SWEEP (the sweep file, required for all but workers), BBMX (the
# binary), BBMX_DIR (shared working directory, default the current one), BBMX_SBATCH_ARGS
# (extra sbatch options for every job, e.g. "--partition=long --account=lab"),
# BBMX_WORKER_SBATCH_ARGS (options for worker and shard jobs; default --exclusive, one whole node
# each; set e.g. "--cpus-per-task=16" to share nodes), BBMX_YES=1 (do not ask),
# BBMX_FORCE=1 (let bbmx plan pass a sweep it finds absurd), and the settings each job script
# lists at its top (BBMX_TLS, BBMX_PORT, BBMX_THREADS, ...), which sbatch passes on.
set -euo pipefail

here=$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)
# shellcheck source=../submit-common.sh
source "$here/../submit-common.sh"
BBMX_SBATCH_ARGS=${BBMX_SBATCH_ARGS:-}
BBMX_WORKER_SBATCH_ARGS=${BBMX_WORKER_SBATCH_ARGS---exclusive}

# sbatch_id submits and prints the job id (sbatch --parsable prints "id" or "id;cluster").
sbatch_id() {
	local out
	# shellcheck disable=SC2086 # the *_SBATCH_ARGS are lists of options
	out=$(sbatch --parsable $BBMX_SBATCH_ARGS "$@") || die "sbatch $* failed"
	echo "${out%%;*}"
}

mode=${1:-}
[[ -n $mode ]] || usage
mkdir -p "$BBMX_DIR"
cd "$BBMX_DIR"
case $mode in
coordinated)
	workers=$(count "${2:-}" 4 WORKERS)
	plan
	secrets
	coord=$(sbatch_id "$here/coordinator.sbatch")
	# shellcheck disable=SC2086
	array=$(sbatch_id --dependency="after:$coord" --array="0-$((workers - 1))" $BBMX_WORKER_SBATCH_ARGS "$here/workers.sbatch")
	echo "coordinator job $coord, worker array $array ($workers workers)"
	echo "watch: squeue -j $coord,$array   and   $BBMX status --coordinator \$(cat $BBMX_DIR/coordinator.address) --token-file $BBMX_SECRETS/token --tls-ca $BBMX_SECRETS/ca.crt --tls-server-name bbmx-coordinator"
	;;
workers)
	workers=$(count "${2:-}" 4 WORKERS)
	# shellcheck disable=SC2086
	array=$(sbatch_id --array="0-$((workers - 1))" $BBMX_WORKER_SBATCH_ARGS "$here/workers.sbatch")
	echo "worker array $array ($workers workers)"
	;;
coordinator)
	absolute_sweep
	secrets
	coord=$(sbatch_id "$here/coordinator.sbatch")
	echo "coordinator job $coord"
	;;
allocation)
	nodes=$(count "${2:-}" 2 NODES)
	plan
	secrets
	job=$(sbatch_id --nodes="$nodes" "$here/allocation.sbatch")
	echo "sweep job $job ($nodes nodes)"
	;;
shards)
	shards=$(count "${2:-}" 8 SHARDS)
	export BBMX_SHARDS=$shards
	plan
	# shellcheck disable=SC2086
	array=$(sbatch_id --array="0-$((shards - 1))" $BBMX_WORKER_SBATCH_ARGS "$here/shards.sbatch")
	merge=$(sbatch_id --dependency="afterok:$array" --kill-on-invalid-dep=yes "$here/merge.sbatch")
	echo "shard array $array ($shards shards), merge job $merge"
	;;
*) usage ;;
esac
