#!/bin/bash
#SBATCH --job-name=longrun-generate
#SBATCH --nodes=1
#SBATCH --ntasks=1
#SBATCH --mem=16G
#SBATCH --time=02:00:00
#SBATCH --output=%x-%j.out
# Explores a model description's states and writes its chain file:
#   sbatch jobs/slurm/generate.sh MODEL.yaml CHAIN.h5 [generate options, e.g. --set servers=8]
# One task: generation runs on one core; give it the memory (about 44 bytes a
# state plus the transitions, README "Size and speed").
set -euo pipefail
# Slurm runs a copy of this script: find the jobs folder from the submitted path.
LONGRUN_JOBS_DIR=${LONGRUN_JOBS_DIR:-$(dirname "$(dirname "$(scontrol -o show job "${SLURM_JOB_ID:?}" |
  tr " " "\n" | sed -n "s/^Command=//p")")")}
# shellcheck source-path=SCRIPTDIR/.. source=lib/common.sh
source "$LONGRUN_JOBS_DIR/lib/common.sh"
longrun_job slurm generate "$@"
