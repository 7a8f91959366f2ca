#!/usr/bin/env bash
# Strong scaling on this machine: the same chains on 1 and on 2 ranks, side by side,
# with the communication each product causes measured, not assumed.
#
#   benchmarks/run_scaling.sh [BUILD_DIR [WORK_DIR]]
#
# BUILD_DIR  a CMake build folder holding longrun, longrun-family and
#            longrun-bandwidth (default: build)
# WORK_DIR   where chain, result and log files go (default: a fresh mktemp folder,
#            removed at the end unless LONGRUN_BENCH_KEEP=1 or a run failed)
#
# Chains (LONGRUN_SCALING_CHAINS, default "tandem-1m ncd-1m walk-1m queues-1m
# tandem-10m queues-10m"):
#   tandem-1m   `longrun-family tandem --n1 1001 --n2 1001`            1,002,001 states
#   ncd-1m      `longrun-family ncd --blocks 1000 --block-size 1000`   1,000,000
#   walk-1m     `longrun-family graph-walk --nodes 1000000 --degree 6` 1,000,000
#   queues-1m   `longrun generate benchmarks/three_queues.yaml --set room=99`   1,000,000
#   tandem-10m  `longrun-family tandem --n1 3163 --n2 3163`            10,004,569
#   queues-10m  `longrun generate benchmarks/three_queues.yaml --set room=215` 10,077,696
# For each chain, LONGRUN_SCALING_ROUNDS rounds (default 3); each round runs
#   longrun-bandwidth --repeat LONGRUN_SCALING_REPEAT (default 30): one product, the
#     halo exchange alone, the on-rank block alone, the STREAM triad;
#   longrun solve --json (method auto, --tol 1e-10): seconds per phase;
# once on 1 rank and once on 2 (mpirun -n 2), the order alternating from round to
# round (1,2 then 2,1), so that a slow spell of the machine hits both alike.
# Medians over the rounds are reported, with the spread (max/min) of the wall time.
# Memory per method: on each chain named in LONGRUN_SCALING_MEMORY_CHAINS (default
# "queues-1m"), 1-rank runs of `longrun solve --method M` for each M in
# LONGRUN_SCALING_METHODS (default "power gauss-seidel linear eigen aggregation") and of
# `longrun check` (the chain as read, no solver) for the baseline: max RSS, per
# state and per nonzero; the chain file's size on disk too. These runs are capped at
# LONGRUN_SCALING_MEMORY_TIMEOUT seconds (default 120): the peak comes early, and a
# run cut off there still has its max RSS.
# Every run is capped at LONGRUN_BENCH_TIMEOUT seconds (default 900) and timed under
# /usr/bin/time -v (max RSS per process).
# A Markdown report goes to stdout and to WORK_DIR/results.md. Exit status 0 when
# every run succeeded, 1 otherwise (the report is written anyway).

set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
python=/usr/bin/python3

invocation="$0${*:+ $*}"
build="${1:-build}"
work="${2:-}"
chains="${LONGRUN_SCALING_CHAINS:-tandem-1m ncd-1m walk-1m queues-1m tandem-10m queues-10m}"
rounds="${LONGRUN_SCALING_ROUNDS:-3}"
repeat="${LONGRUN_SCALING_REPEAT:-30}"
limit="${LONGRUN_BENCH_TIMEOUT:-900}"
memory_chains="${LONGRUN_SCALING_MEMORY_CHAINS-queues-1m}"
methods="${LONGRUN_SCALING_METHODS-power gauss-seidel linear eigen aggregation}"
# The peak comes within seconds; a method that then iterates on is cut off here.
memory_limit="${LONGRUN_SCALING_MEMORY_TIMEOUT:-120}"
tolerance=1e-10

# shellcheck source=benchmarks/bench_common.sh
source "$(dirname "${BASH_SOURCE[0]}")/bench_common.sh"
require_binaries
bandwidth="$(find_binary longrun-bandwidth)" || die "no longrun-bandwidth binary under '$build'"
for number in "$rounds" "$repeat" "$limit" "$memory_limit"; do
    [[ "$number" =~ ^[0-9]+$ ]] || die "'$number' is not a whole number (see LONGRUN_SCALING_*)"
done

start_run scaling
for name in $chains; do
    chain="$work/$name.h5"
    case "$name" in
    tandem-1m) generate=("$family" tandem --n1 1001 --n2 1001 -o "$chain") ;;
    tandem-10m) generate=("$family" tandem --n1 3163 --n2 3163 -o "$chain") ;;
    ncd-1m) generate=("$family" ncd --blocks 1000 --block-size 1000 -o "$chain") ;;
    walk-1m) generate=("$family" graph-walk --nodes 1000000 --degree 6 -o "$chain") ;;
    queues-1m) generate=("$longrun" generate "$here/three_queues.yaml" --set room=99 -o "$chain") ;;
    queues-10m) generate=("$longrun" generate "$here/three_queues.yaml" --set room=215 -o "$chain") ;;
    *) die "unknown chain '$name' in LONGRUN_SCALING_CHAINS" ;;
    esac
    run_timed "$name-generate" "$name" generate 1 "$chain" must -- "${generate[@]}"
    [[ -s "$chain" ]] || continue
    stat -c '%s' "$chain" > "$work/$name.bytes"
    for memory_chain in $memory_chains; do
        [[ "$memory_chain" == "$name" ]] || continue
        whole_run_limit="$limit"
        limit="$memory_limit"
        run_timed "$name-memory-check" "$name" "memory check" 1 - must -- \
            "$longrun" check "$chain" --json
        for m in $methods; do
            out="$work/$name-memory-$m.h5"
            run_timed "$name-memory-$m" "$name" "memory $m" 1 "$out" may -- \
                "$longrun" solve "$chain" -o "$out" --method "$m" --tol "$tolerance" --json -q
            rm -f -- "$out"
        done
        limit="$whole_run_limit"
    done
    for ((round = 1; round <= rounds; round++)); do
        order="1 2"
        ((round % 2 == 0)) && order="2 1"
        for ranks in $order; do
            launch=() # the command itself on 1 rank, under mpirun otherwise
            ((ranks > 1)) && launch=(mpirun -n "$ranks" -x OMP_NUM_THREADS)
            run_timed "$name-bandwidth-$ranks-r$round" "$name" bandwidth "$ranks" - must -- \
                "${launch[@]}" "$bandwidth" "$chain" --repeat "$repeat" --triad-mib 256
            out="$work/$name-solve-$ranks-r$round.h5"
            run_timed "$name-solve-$ranks-r$round" "$name" solve "$ranks" "$out" must -- \
                "${launch[@]}" "$longrun" solve "$chain" -o "$out" --tol "$tolerance" --json -q
            rm -f -- "$out"
        done
    done
    if [[ "${LONGRUN_BENCH_KEEP:-0}" != 1 ]]; then
        rm -f -- "$chain" # the 10^7-state chains take about 0.7 GB each
    fi
done

{
    echo "Run started $started on $cores cores (nproc; CPU: ${cpu_model:-unknown}), $memory_gib GiB"
    echo "memory (free -g), OMP_NUM_THREADS=1, per-run timeout ${limit} s, certificate tolerance $tolerance."
    echo "Binaries: $version, built $built from ${source_dir:-an unknown source folder} ($source_commit)."
    echo "Command: LONGRUN_SCALING_CHAINS=\"$chains\" LONGRUN_SCALING_ROUNDS=$rounds" \
        "LONGRUN_SCALING_REPEAT=$repeat LONGRUN_SCALING_MEMORY_CHAINS=\"$memory_chains\"" \
        "LONGRUN_SCALING_METHODS=\"$methods\" LONGRUN_BENCH_TIMEOUT=$limit $invocation"
    echo
    "$python" "$here/scaling_report.py" "$records" "$work" "$(getconf CLK_TCK)"
} | tee "$work/results.md"
[[ "$failures" -eq 0 ]]
