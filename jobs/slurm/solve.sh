#!/bin/bash
#SBATCH --job-name=longrun-solve
#SBATCH --nodes=1
#SBATCH --ntasks=4
#SBATCH --time=04:00:00
#SBATCH --signal=B:TERM@300
#SBATCH --output=%x-%j.out
# Solves a chain, checkpointing as it goes:
#   sbatch jobs/slurm/solve.sh CHAIN.h5 RESULT.h5 [solve options, e.g. --method linear --tol 1e-12]
# Five minutes before the time limit Slurm signals this script (--signal=B:TERM@300);
# longrun then writes its checkpoint, stops, and the job submits itself again to go
# on from there. RESULT.h5 appears only when the answer is certified.
set -euo pipefail
# Slurm runs a copy of this script: find the jobs folder from the submitted path.
LONGRUN_JOBS_DIR=${LONGRUN_JOBS_DIR:-$(dirname "$(dirname "$(scontrol -o show job "${SLURM_JOB_ID:?}" |
  tr " " "\n" | sed -n "s/^Command=//p")")")}
# shellcheck source-path=SCRIPTDIR/.. source=lib/common.sh
source "$LONGRUN_JOBS_DIR/lib/common.sh"
longrun_job slurm solve "$@"
