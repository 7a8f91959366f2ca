#!/bin/bash
#SBATCH --job-name=longrun-sweep
#SBATCH --nodes=1
#SBATCH --ntasks=2
#SBATCH --time=01:00:00
#SBATCH --output=%x-%A_%a.out
# One parameter over a range of values, one value per task of a job array:
#   sbatch --array=0-10 jobs/slurm/sweep.sh MODEL.yaml PREFIX --vary arrival=0.5:1.5:0.1 [sweep options]
# Task i computes value i (0-based) and writes PREFIX.point-i.json; the array's first
# task submits jobs/slurm/sweep-gather.sh to run once every task has ended well.
# --array must cover 0 to the number of values - 1.
set -euo pipefail
# Slurm runs a copy of this script: find the jobs folder from the submitted path.
LONGRUN_JOBS_DIR=${LONGRUN_JOBS_DIR:-$(dirname "$(dirname "$(scontrol -o show job "${SLURM_JOB_ID:?}" |
  tr " " "\n" | sed -n "s/^Command=//p")")")}
# shellcheck source-path=SCRIPTDIR/.. source=lib/common.sh
source "$LONGRUN_JOBS_DIR/lib/common.sh"
longrun_job slurm sweep "$@"
