#!/usr/bin/env bash
# Benchmark: every method on mid-size chains of each family, side by side in one
# run (`longrun compare`), the evidence behind auto's decision rule (README, "How
# auto chooses").
#
#   benchmarks/run_methods.sh [BUILD_DIR [WORK_DIR]]
#
# Chains (sizes chosen so that every method can finish in minutes here):
#   tandem  300 x 300 tandem line (90,000 states), longrun-family tandem --n1 300 --n2 300
#   ncd     100 blocks of 1,000 states, coupling 1e-4 (100,000 states)
#   walk    random walk on a random graph, 100,000 nodes, average degree 6
#   mmck    M/M/c/K with 20 servers and room for 20,000 (20,001 states, a long line)
# Environment: LONGRUN_METHODS_RANKS (default 1), LONGRUN_METHODS_LIST (default every
# method, fastest-measured first),
# LONGRUN_METHODS_BUDGET (seconds per chain, default 600: a method still running at
# the budget finishes, later ones are skipped rows). Iteration caps for the slow
# classical methods are passed as PETSc options (see below) so that one chain
# cannot eat the run. Output: WORK/<chain>.json, .csv, .png, .svg and a Markdown
# table per chain on stdout and in WORK/methods.md.
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
python=/usr/bin/python3
build="${1:-build}"
work="${2:-$(mktemp -d "${TMPDIR:-/tmp}/longrun-methods.XXXXXX")}"
ranks="${LONGRUN_METHODS_RANKS:-1}"
methods="${LONGRUN_METHODS_LIST:-aggregation,direct,shift-invert,linear,eigen,gauss-seidel,power,gth}"
budget="${LONGRUN_METHODS_BUDGET:-600}"

# shellcheck source=benchmarks/bench_common.sh
source "$(dirname "${BASH_SOURCE[0]}")/bench_common.sh"
require_binaries
mkdir -p "$work"
work="$(cd "$work" && pwd)"
cores="$(nproc)" # before OMP_NUM_THREADS, which nproc honours
export OMP_NUM_THREADS=1

run() { # quietly, with mpirun when more than one rank
    if [[ "$ranks" -gt 1 ]]; then
        OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1 \
            mpirun --oversubscribe -n "$ranks" "$@"
    else
        "$@"
    fi
}

declare -A chains=(
    [tandem]="tandem --n1 300 --n2 300"
    [ncd]="ncd --blocks 100 --block-size 1000 --coupling 1e-4"
    [walk]="graph-walk --nodes 100000 --degree 6"
    [mmck]="mmck --servers 20 --capacity 20000 --arrival 19 --service 1"
)
caps=(-power_max_it 200000 -gs_max_it 20000 -eigen_eps_max_it 1000 -shift_eps_max_it 200
    -linear_ksp_max_it 500)

{
    echo "# Methods side by side ($(date -u +%Y-%m-%dT%H:%MZ), $ranks rank(s))"
    echo
    echo "Command: \`$0 $*\`; commit $(git -C "$here/.." rev-parse --short HEAD 2> /dev/null || echo unknown)"
    echo "Machine: $cores cores, $(grep -m1 '^model name' /proc/cpuinfo | cut -d: -f2- | sed 's/^ *//')"
} > "$work/methods.md"

for name in tandem ncd walk mmck; do
    chain="$work/$name.h5"
    # shellcheck disable=SC2086  # the family's arguments are words
    [[ -f "$chain" ]] || "$family" ${chains[$name]} -o "$chain" > /dev/null
    run "$longrun" compare "$chain" --methods "$methods" --max-seconds "$budget" -q \
        --json "$work/$name.json" --csv "$work/$name.csv" --plot "$work/$name" -- "${caps[@]}"
    "$python" - "$work/$name.json" >> "$work/methods.md" << 'PY'
import json, sys
data = json.load(open(sys.argv[1]))
chain = data["chains"][0]
print(f"\n## {chain['path'].rsplit('/', 1)[-1]}: {chain['kind']}, {chain['states']:,} states, "
      f"{chain['transitions']:,} transitions; one product {chain['product_seconds'] * 1e3:.3g} ms\n")
print("| method | certified | iterations | products | product-equivalents | seconds | residual | outcome |")
print("|---|---|---|---|---|---|---|---|")
for r in data["runs"]:
    res = "" if r["residual"] is None else f"{r['residual']:.2e}"
    pe = "" if r.get("product_equivalents") is None else f"{r['product_equivalents']:,.0f}"
    print(f"| {r['method']} | {'yes' if r['converged'] else 'no'} | {r['iterations']} | "
          f"{r['matvecs']} | {pe} | {r['wall_seconds']:.2f} | {res} | {r['outcome']} |")
PY
done
cat "$work/methods.md"
echo "(files in $work)" >&2
