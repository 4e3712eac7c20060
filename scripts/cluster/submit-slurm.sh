#!/bin/bash
# Submits one tripass job as an N-task Slurm array plus the join step that runs when
# every task has succeeded, and prints both job ids.
#
#   N=8 scripts/cluster/submit-slurm.sh smooth /data/core.tif /data/core-smooth.tif --sigma 12um
#
# Extra sbatch options (partition, memory, account) go in SBATCH_OPTS, e.g.
# SBATCH_OPTS="--partition=short --mem=2G". The tasks inherit TRIPASS if it is set.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
n=${N:-8}
if [ "$#" -lt 3 ]; then
  echo "usage: N=tasks $0 COMMAND IN OUT [FLAGS...]" >&2
  exit 2
fi
out=$3
# shellcheck disable=SC2086
array=$(sbatch --parsable ${SBATCH_OPTS:-} --array=1-"$n" "$here/tripass-array.sbatch" "$@")
array=${array%%;*}
# shellcheck disable=SC2086
join=$(sbatch --parsable ${SBATCH_OPTS:-} --dependency=afterok:"$array" --kill-on-invalid-dep=yes \
  "$here/tripass-join.sbatch" "$out")
echo "array job $array ($n tasks), join job ${join%%;*}"
