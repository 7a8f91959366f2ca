#!/usr/bin/env bash
# Benchmark suite: longrun against scipy on the benchmark families, side by side in
# one run, so that the machine's noise hits every solver alike.
#
#   benchmarks/run_suite.sh [BUILD_DIR [WORK_DIR]]
#
# BUILD_DIR  a CMake build folder holding longrun, longrun-family and
#            longrun-bandwidth (default: build)
# WORK_DIR   where chain, result and log files go (default: a fresh mktemp folder,
#            removed at the end unless LONGRUN_BENCH_KEEP=1 or a run failed)
#
# Chains (LONGRUN_SUITE_FAMILIES, default "tandem queues ncd walk"), sizes from:
#   tandem  `longrun-family tandem --n1 N --n2 N`, N = LONGRUN_SUITE_TANDEM (1001:
#           1,002,001 states)
#   queues  `longrun generate benchmarks/three_queues.yaml --set room=R`,
#           R = LONGRUN_SUITE_QUEUE_ROOM (215: 216^3 = 10,077,696 states)
#   ncd     `longrun-family ncd --blocks B --block-size S`, B =
#           LONGRUN_SUITE_NCD_BLOCKS (1000), S = LONGRUN_SUITE_NCD_BLOCK_SIZE (1000)
#   walk    `longrun-family graph-walk --nodes N --degree D`, N =
#           LONGRUN_SUITE_WALK_NODES (1000000), D = LONGRUN_SUITE_WALK_DEGREE (6)
# For each chain, one after another:
#   longrun-bandwidth on 1 rank and on 2 ranks (mpirun -n 2): the time of one
#     product with the chain's matrix, and a STREAM triad on the same ranks;
#   longrun solve --method auto on 1 rank and on 2 ranks;
#   longrun solve --method M on 1 rank for each M in LONGRUN_SUITE_METHODS
#     (default "linear eigen aggregation");
#   scipy_reference.py --method M for each M in LONGRUN_SUITE_SCIPY_METHODS
#     (default "direct gmres-ilu eigs"), pinned at state 0 on tandem and queues
#     (the empty system, their mode), its own guess otherwise; skipped on chains
#     with more than LONGRUN_SUITE_SCIPY_MAX_STATES states (default 2000000: the
#     10^7-state chain would not finish) and run under an address-space limit of
#     LONGRUN_SUITE_SCIPY_MEMORY_GIB GiB (default 16; sparse LU of a random graph
#     fills in without bound, and the machine is shared).
# Each run is timed as a whole command (date +%s.%N around it), under
# /usr/bin/time -v (max RSS) and capped at LONGRUN_BENCH_TIMEOUT seconds (default
# 900). longrun's --json report gives the certified residual, iterations, method,
# and per attempt its products (matvecs) and seconds. Every run's distribution is
# compared with the best certified one of its chain (smallest residual among the
# runs at or below 1e-10): max absolute difference. Solve times are also given in
# product-equivalents: solve seconds over the best time of one product with the
# same matrix on the same number of ranks (longrun-bandwidth --repeat
# LONGRUN_SUITE_REPEAT, default 50; large triad arrays of LONGRUN_SUITE_TRIAD_MIB
# MiB, default 256, per array per rank).
# A Markdown report goes to stdout and to WORK_DIR/results.md: per chain a table of
# runs, the bandwidth measurements and the ratios "scipy's fastest certified method
# / longrun auto" on 1 and 2 ranks.
#
# OMP_NUM_THREADS=1 is set for every run: hypre under MPI is faster that way, a
# "rank" then means one core, and scipy (reference BLAS, SuperLU) is single-threaded.
# Chain files are deleted after their chain's runs unless LONGRUN_BENCH_KEEP=1.
# Exit status: 0 when every generation, bandwidth run and longrun auto run
# succeeded, 1 otherwise (the report is written anyway). A single method or a scipy
# route that fails or times out is a result, listed in the report, not a failure.

set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
python=/usr/bin/python3 # Debian's python: numpy, scipy and h5py

invocation="$0${*:+ $*}"
build="${1:-build}"
work="${2:-}"
families="${LONGRUN_SUITE_FAMILIES:-tandem queues ncd walk}"
tandem_n="${LONGRUN_SUITE_TANDEM:-1001}"
queue_room="${LONGRUN_SUITE_QUEUE_ROOM:-215}"
ncd_blocks="${LONGRUN_SUITE_NCD_BLOCKS:-1000}"
ncd_block_size="${LONGRUN_SUITE_NCD_BLOCK_SIZE:-1000}"
walk_nodes="${LONGRUN_SUITE_WALK_NODES:-1000000}"
walk_degree="${LONGRUN_SUITE_WALK_DEGREE:-6}"
methods="${LONGRUN_SUITE_METHODS-linear eigen aggregation}" # set but empty: none
scipy_methods="${LONGRUN_SUITE_SCIPY_METHODS-direct gmres-ilu eigs}"
scipy_max_states="${LONGRUN_SUITE_SCIPY_MAX_STATES:-2000000}"
scipy_memory_gib="${LONGRUN_SUITE_SCIPY_MEMORY_GIB:-16}"
repeat="${LONGRUN_SUITE_REPEAT:-50}"
triad_mib="${LONGRUN_SUITE_TRIAD_MIB:-256}"
limit="${LONGRUN_BENCH_TIMEOUT:-900}"
tolerance=1e-10

# shellcheck source=benchmarks/bench_common.sh
source "$(dirname "${BASH_SOURCE[0]}")/bench_common.sh"
require_binaries
bandwidth="$(find_binary longrun-bandwidth)" || die "no longrun-bandwidth binary under '$build'"
command -v prlimit > /dev/null || die "'prlimit' is not available (util-linux)"
"$python" -c 'import h5py, numpy, scipy' 2> /dev/null ||
    die "$python lacks h5py, numpy or scipy"
for number in "$tandem_n" "$queue_room" "$ncd_blocks" "$ncd_block_size" "$walk_nodes" \
    "$scipy_max_states" "$scipy_memory_gib" "$repeat" "$limit"; do
    [[ "$number" =~ ^[0-9]+$ ]] || die "'$number' is not a whole number (see the LONGRUN_SUITE_* variables)"
done

start_run suite
for name in $families; do
    chain="$work/$name.h5"
    pin=()
    case "$name" in
    tandem)
        states=$((tandem_n * tandem_n))
        generate=("$family" tandem --n1 "$tandem_n" --n2 "$tandem_n" -o "$chain")
        pin=(--pin 0)
        ;;
    queues)
        states=$(((queue_room + 1) ** 3))
        generate=("$longrun" generate "$here/three_queues.yaml" --set "room=$queue_room"
            -o "$chain")
        pin=(--pin 0)
        ;;
    ncd)
        states=$((ncd_blocks * ncd_block_size))
        generate=("$family" ncd --blocks "$ncd_blocks" --block-size "$ncd_block_size"
            -o "$chain")
        ;;
    walk)
        states="$walk_nodes"
        generate=("$family" graph-walk --nodes "$walk_nodes" --degree "$walk_degree"
            -o "$chain")
        ;;
    *) die "unknown family '$name' in LONGRUN_SUITE_FAMILIES (tandem, queues, ncd or walk)" ;;
    esac

    run_timed "$name-generate" "$name" generate 1 "$chain" must -- "${generate[@]}"
    [[ -s "$chain" ]] || continue

    run_timed "$name-bandwidth-1" "$name" bandwidth 1 - must -- \
        "$bandwidth" "$chain" --repeat "$repeat" --triad-mib "$triad_mib"
    run_timed "$name-bandwidth-2" "$name" bandwidth 2 - must -- \
        mpirun -n 2 -x OMP_NUM_THREADS "$bandwidth" "$chain" --repeat "$repeat" \
        --triad-mib "$triad_mib"

    run_timed "$name-auto-1" "$name" "longrun auto" 1 "$work/$name-auto-1.h5" must -- \
        "$longrun" solve "$chain" -o "$work/$name-auto-1.h5" --tol "$tolerance" --json -q
    run_timed "$name-auto-2" "$name" "longrun auto" 2 "$work/$name-auto-2.h5" must -- \
        mpirun -n 2 -x OMP_NUM_THREADS "$longrun" solve "$chain" \
        -o "$work/$name-auto-2.h5" --tol "$tolerance" --json -q
    for m in $methods; do
        run_timed "$name-$m-1" "$name" "longrun $m" 1 "$work/$name-$m-1.h5" may -- \
            "$longrun" solve "$chain" -o "$work/$name-$m-1.h5" --method "$m" \
            --tol "$tolerance" --json -q
    done
    for m in $scipy_methods; do
        id="$name-scipy-$m"
        if ((states > scipy_max_states)); then
            echo "[$(date +%T)] $id: skipped, $states states > LONGRUN_SUITE_SCIPY_MAX_STATES=$scipy_max_states" >&2
            record "$id" "$name" "scipy $m" 1 skipped 0 0 0 -
            continue
        fi
        run_timed "$id" "$name" "scipy $m" 1 "$work/$id.npy" may -- \
            prlimit --as=$((scipy_memory_gib * 1024 * 1024 * 1024)) -- \
            "$python" "$here/scipy_reference.py" "$chain" --method "$m" "${pin[@]}" \
            --out "$work/$id.npy"
    done
    if [[ "${LONGRUN_BENCH_KEEP:-0}" != 1 ]]; then
        rm -f -- "$chain" # the 10^7-state chain takes about 0.7 GB
    fi
done

{
    echo "Run started $started on $cores cores (nproc; CPU: ${cpu_model:-unknown}), $memory_gib GiB"
    echo "memory (free -g), OMP_NUM_THREADS=1, per-run timeout ${limit} s, certificate tolerance $tolerance."
    echo "Binaries: $version, built $built from ${source_dir:-an unknown source folder} ($source_commit)."
    echo "Command: LONGRUN_SUITE_FAMILIES=\"$families\" LONGRUN_SUITE_TANDEM=$tandem_n" \
        "LONGRUN_SUITE_QUEUE_ROOM=$queue_room LONGRUN_SUITE_NCD_BLOCKS=$ncd_blocks" \
        "LONGRUN_SUITE_NCD_BLOCK_SIZE=$ncd_block_size LONGRUN_SUITE_WALK_NODES=$walk_nodes" \
        "LONGRUN_SUITE_WALK_DEGREE=$walk_degree LONGRUN_SUITE_METHODS=\"$methods\"" \
        "LONGRUN_SUITE_SCIPY_METHODS=\"$scipy_methods\"" \
        "LONGRUN_SUITE_SCIPY_MAX_STATES=$scipy_max_states" \
        "LONGRUN_SUITE_SCIPY_MEMORY_GIB=$scipy_memory_gib LONGRUN_SUITE_REPEAT=$repeat" \
        "LONGRUN_SUITE_TRIAD_MIB=$triad_mib LONGRUN_BENCH_TIMEOUT=$limit $invocation"
    echo
    "$python" "$here/suite_report.py" "$records" "$work" "$(getconf CLK_TCK)" "$tolerance" \
        "$scipy_max_states"
} | tee "$work/results.md"

if [[ "$failures" -ne 0 ]]; then
    echo "run_suite.sh: $failures run(s) failed; their logs are in $work" >&2
    exit 1
fi
