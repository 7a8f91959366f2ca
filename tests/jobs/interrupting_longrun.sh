#!/bin/bash
# Stands in for longrun in the job tests' resubmission case only (the stop case runs
# the real longrun and stops it with a real signal). A resubmitted job repeats the
# first job's command line word for word, so a real first run could be made to
# stop mid-solve only by a command line that never finishes, in the resubmitted
# job too; this stand-in lets the same command line be interrupted once and then
# finish. Every command other than solve goes to the real program ($LONGRUN_REAL).
# solve:
#   FAKE_MODE=once    the first time (no $FAKE_MARK yet): run the real solve towards an
#                     unreachable tolerance, which leaves the best iterate in the
#                     checkpoint, then exit 7 as an interrupted solve does; afterwards
#                     the real solve.
set -euo pipefail
real=${LONGRUN_REAL:?}
args=("$@")
solve_at=-1
checkpoint=""
for i in "${!args[@]}"; do
  [[ ${args[i]} == solve ]] && ((solve_at < 0)) && solve_at=$i
  [[ ${args[i]} == --checkpoint ]] && checkpoint=${args[i + 1]}
done
((solve_at >= 0)) || exec "$real" "$@"
rank=${OMPI_COMM_WORLD_RANK:-0}

case ${FAKE_MODE:-} in
  once)
    [[ -e $FAKE_MARK ]] && exec "$real" "$@"
    unreachable=()
    for ((i = 0; i < ${#args[@]}; i++)); do
      case ${args[i]} in
        --tol | --method) ((i += 1)) ;;
        *) unreachable+=("${args[i]}") ;;
      esac
    done
    "$real" "${unreachable[@]}" --tol 1e-300 --method linear && exit 70
    [[ -f $checkpoint ]] || exit 71
    ((rank == 0)) && touch "$FAKE_MARK"
    exit 7
    ;;
  *) exec "$real" "$@" ;;
esac
