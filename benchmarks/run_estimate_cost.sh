#!/usr/bin/env bash
# Benchmark: what the error estimate costs (README, "How the error is estimated").
# Each method solves, reaches the residual --tol, then refines in 10x residual steps
# until its corrections estimate the error within --tol. The cost of the estimate
# is the time after the iterate first met the residual --tol (where a residual
# certificate would have stopped), read from the method's own timed residual
# history in `longrun compare --json`, beside the whole solve, in one run.
#
#   benchmarks/run_estimate_cost.sh [BUILD_DIR [WORK_DIR]]
#
# Chains (10^6 states each; the benchmark families of RESULTS.md):
#   tandem  longrun-family tandem --n1 1001 --n2 1001
#   ncd     longrun-family ncd --blocks 1000 --block-size 1000 --coupling 1e-4
#   walk    longrun-family graph-walk --nodes 1000000 --degree 6
#   queues  longrun generate benchmarks/three_queues.yaml --set room=99
# Methods: LONGRUN_ESTIMATE_METHODS (default aggregation: what auto runs and
# certifies with on these chains; `linear` on the nearly decomposable chain takes
# far longer than the rest together). Output: a Markdown table on stdout and
# WORK/cost.md.
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
python=/usr/bin/python3
build="${1:-build}"
work="${2:-}"
methods="${LONGRUN_ESTIMATE_METHODS:-aggregation}"

# shellcheck source=benchmarks/bench_common.sh
source "$(dirname "${BASH_SOURCE[0]}")/bench_common.sh"
require_binaries
start_run estimate-cost

declare -A chains=(
    [tandem]="tandem --n1 1001 --n2 1001"
    [ncd]="ncd --blocks 1000 --block-size 1000 --coupling 1e-4"
    [walk]="graph-walk --nodes 1000000 --degree 6"
)
{
    echo "Command: \`$0 $*\`; source $source_commit; $cores cores, $memory_gib GiB, $cpu_model;"
    echo "started $started"
    echo
    echo "| chain | method | certified | seconds | after the residual tol | share | estimated error | residual |"
    echo "|---|---|---|---:|---:|---:|---:|---:|"
} > "$work/cost.md"
for name in tandem ncd walk queues; do
    chain="$work/$name.h5"
    if [[ ! -f "$chain" ]]; then
        if [[ "$name" == queues ]]; then
            "$longrun" generate "$here/three_queues.yaml" --set room=99 -o "$chain" > /dev/null 2>&1
        else
            # shellcheck disable=SC2086  # the family's arguments are words
            "$family" ${chains[$name]} -o "$chain" > /dev/null
        fi
    fi
    "$longrun" compare "$chain" --methods "$methods" -q --json "$work/$name.json" > /dev/null
    "$python" - "$work/$name.json" "$name" >> "$work/cost.md" << 'PY'
import json, sys
data = json.load(open(sys.argv[1]))
tol = data["tolerance"]
for r in data["runs"]:
    hist, secs = r["history"], r["history_seconds"]
    first = next((t for h, t in zip(hist, secs) if h <= tol), None)
    total = secs[-1] if secs else r["wall_seconds"]
    after = "" if first is None else f"{total - first:.2f}"
    share = "" if first is None or total <= 0 else f"{100 * (total - first) / total:.0f} %"
    est = "" if r.get("error_estimate") is None else f"{r['error_estimate']:.1e}"
    res = "" if r["residual"] is None else f"{r['residual']:.1e}"
    print(f"| {sys.argv[2]} | {r['method']} | {'yes' if r['converged'] else 'no'} | "
          f"{total:.2f} | {after} | {share} | {est} | {res} |")
PY
done
cat "$work/cost.md"
