#!/bin/sh
# submit.sh submits the depot sweep to Slurm: a job array of N shards
# (array.sbatch) and a merge job (merge.sbatch) that starts once every
# shard has succeeded (sbatch --dependency=afterok).
#
# Usage, from a folder on a file system shared with the compute nodes:
#
#	sh path/to/examples/cluster/submit.sh N [flags of the program]
#
# for example: sh examples/cluster/submit.sh 40 -records sweep-records -out sweep-out
#
# It builds the program once (go build, here) into $SWEEP_BIN (default
# ./depot-sweep), then submits both jobs with the same flags. $SBATCH_ARGS
# is passed to both sbatch calls (partition, account, time limit ...).
# Outputs: depot-sweep-<array>_<task>.out and depot-sweep-merge-<job>.out.
set -eu
if [ $# -lt 1 ]; then
	echo "usage: submit.sh N [flags of the program]" >&2
	exit 2
fi
n=$1
shift
case $n in
'' | *[!0-9]* | 0)
	echo "submit.sh: the number of shards must be a positive integer, not '$n'" >&2
	exit 2
	;;
esac
here=$(cd "$(dirname "$0")" && pwd)
bin=${SWEEP_BIN:-depot-sweep}
case $bin in
/*) ;;
*) bin=$PWD/$bin ;;
esac
(cd "$here" && go build -o "$bin" .)
# shellcheck disable=SC2086 # SBATCH_ARGS holds several options
array=$(sbatch --parsable --array=0-$((n - 1)) ${SBATCH_ARGS:-} "$here/array.sbatch" "$bin" "$@")
array=${array%%;*}
# shellcheck disable=SC2086
merge=$(sbatch --parsable --dependency=afterok:"$array" ${SBATCH_ARGS:-} "$here/merge.sbatch" "$bin" "$@")
merge=${merge%%;*}
echo "array job $array ($n shards), merge job $merge"
