#!/bin/bash
#SBATCH --job-name=longrun-summarize
#SBATCH --nodes=1
#SBATCH --ntasks=2
#SBATCH --time=01:00:00
#SBATCH --output=%x-%j.out
# Adds the summary to a result and writes RESULT-report.html and RESULT-summary.json:
#   sbatch jobs/slurm/summarize.sh RESULT.h5 [summarize options, e.g. --tail "full=queue==10"]
# After a solve job: sbatch --dependency=afterok:SOLVE_JOB_ID ... (a solve job that
# resubmitted itself ends with exit code 7, so only the last one of the line counts).
set -euo pipefail
# Slurm runs a copy of this script: find the jobs folder from the submitted path.
LONGRUN_JOBS_DIR=${LONGRUN_JOBS_DIR:-$(dirname "$(dirname "$(scontrol -o show job "${SLURM_JOB_ID:?}" |
  tr " " "\n" | sed -n "s/^Command=//p")")")}
# shellcheck source-path=SCRIPTDIR/.. source=lib/common.sh
source "$LONGRUN_JOBS_DIR/lib/common.sh"
longrun_job slurm summarize "$@"
