#!/bin/bash
#SBATCH --job-name=longrun-sweep-gather
#SBATCH --nodes=1
#SBATCH --ntasks=1
#SBATCH --time=00:30:00
#SBATCH --output=%x-%j.out
# Joins the points of a sweep into PREFIX.csv, PREFIX.json and the plots; submitted
# by sweep.sh, or by hand when some task had to be run again:
#   sbatch jobs/slurm/sweep-gather.sh PREFIX
set -euo pipefail
# Slurm runs a copy of this script: find the jobs folder from the submitted path.
LONGRUN_JOBS_DIR=${LONGRUN_JOBS_DIR:-$(dirname "$(dirname "$(scontrol -o show job "${SLURM_JOB_ID:?}" |
  tr " " "\n" | sed -n "s/^Command=//p")")")}
# shellcheck source-path=SCRIPTDIR/.. source=lib/common.sh
source "$LONGRUN_JOBS_DIR/lib/common.sh"
longrun_job slurm sweep-gather "$@"
