# Shared by slurm/submit.sh and pbs/submit.sh (sourced, not run): settings, the cost estimate
# before submitting, the secrets, and argument checks.
# shellcheck shell=bash

export BBMX=${BBMX:-bbmx}
export BBMX_DIR=${BBMX_DIR:-$PWD}
export BBMX_SWEEP=${BBMX_SWEEP:-}
export BBMX_SECRETS=${BBMX_SECRETS:-$BBMX_DIR/secrets}
BBMX_YES=${BBMX_YES:-}
BBMX_FORCE=${BBMX_FORCE:-}

die() {
	echo "submit.sh: $*" >&2
	exit 2
}

# usage prints the calling script's header comment.
usage() {
	awk 'NR > 1 && /^#/ { sub(/^# ?/, ""); print; next } NR > 1 { exit }' "$0" >&2
	exit 2
}

# absolute_sweep checks BBMX_SWEEP and makes it absolute (jobs start in other directories).
absolute_sweep() {
	[[ -n $BBMX_SWEEP ]] || die "set BBMX_SWEEP to the sweep file"
	[[ -r $BBMX_SWEEP ]] || die "cannot read the sweep file $BBMX_SWEEP"
	BBMX_SWEEP=$(cd "$(dirname "$BBMX_SWEEP")" && pwd)/$(basename "$BBMX_SWEEP")
}

# plan shows the cost estimate and asks before anything is submitted.
plan() {
	absolute_sweep
	local plan_flags=()
	[[ -z $BBMX_FORCE ]] || plan_flags+=(--force)
	echo "== cost estimate (bbmx plan $BBMX_SWEEP)"
	"$BBMX" plan "$BBMX_SWEEP" "${plan_flags[@]}" || die "bbmx plan refused the sweep (BBMX_FORCE=1 to pass it anyway)"
	if [[ -z $BBMX_YES && -t 0 ]]; then
		read -r -p "Submit this sweep? [y/N] " answer
		[[ $answer == [yY]* ]] || die "not submitted"
	fi
}

# secrets makes the token and certificates unless there are some already.
secrets() {
	[[ -e $BBMX_SECRETS/token ]] || "$BBMX" secrets init "$BBMX_SECRETS"
}

count() { # count VALUE DEFAULT NAME: a positive integer
	local n=${1:-$2}
	[[ $n =~ ^[1-9][0-9]*$ ]] || die "$3 must be a positive integer, not '$n'"
	echo "$n"
}
