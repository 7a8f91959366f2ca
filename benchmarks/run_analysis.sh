#!/usr/bin/env bash
# Benchmark: structure analysis (`longrun check`: strongly connected components,
# closed classes, transient states, period) of chains with about 10^7 states, on 1
# rank and on 2 ranks (mpirun -n 2). Target: a 10^7-state chain within 30 s on one
# rank.
#
#   benchmarks/run_analysis.sh [BUILD_DIR [WORK_DIR]]
#
# BUILD_DIR  a CMake build folder holding longrun and longrun-family (default: build)
# WORK_DIR   where chains and logs go (default: a fresh mktemp folder, removed at the
#            end unless LONGRUN_BENCH_KEEP=1 or a run failed)
#
# LONGRUN_ANALYSIS_CHAINS lists the chains as FAMILY:SIZE, default
# "tandem:3163 graph-walk:10000000": `longrun-family tandem --n1 SIZE --n2 SIZE`
# (10,004,569 states) and `longrun-family graph-walk --nodes SIZE --degree 4`.
# Each chain is generated once (timed), then `longrun check --json` runs on it on 1
# rank and on 2 ranks, each timed as a whole command (date +%s.%N around it, so
# reading the file and start-up are included) and under /usr/bin/time -v (max RSS;
# for mpirun, the largest single process). LONGRUN_BENCH_TIMEOUT (seconds, default
# 900) caps each run. A Markdown report goes to stdout and to WORK_DIR/results.md.
# Exit status: 0 when every run succeeded (check exits 0 or 3), 1 otherwise.

set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
repo="$(cd "$here/.." && pwd)"
python=/usr/bin/python3

invocation="$0${*:+ $*}"
build="${1:-build}"
work="${2:-}"
chains="${LONGRUN_ANALYSIS_CHAINS:-tandem:3163 graph-walk:10000000}"
limit="${LONGRUN_BENCH_TIMEOUT:-900}"

# shellcheck source=benchmarks/bench_common.sh
source "$(dirname "${BASH_SOURCE[0]}")/bench_common.sh"
require_binaries

if [[ -z "$work" ]]; then
    work="$(mktemp -d "${TMPDIR:-/tmp}/longrun-analysis.XXXXXX")"
    if [[ "${LONGRUN_BENCH_KEEP:-0}" != 1 ]]; then
        trap 'if [[ "${failures:-0}" -eq 0 ]]; then rm -rf -- "$work"; fi' EXIT
    fi
fi
mkdir -p "$work"
work="$(cd "$work" && pwd)"

cores="$(nproc)"
memory_gib="$(free -g | awk '/^Mem:/ {print $2}')"
cpu_model="$(grep -m1 '^model name' /proc/cpuinfo | cut -d: -f2- | sed 's/^ *//')"
commit="$(git -C "$repo" describe --always --dirty 2> /dev/null || echo unknown)"
started="$(date -u '+%Y-%m-%d %H:%M UTC')"

export OMP_NUM_THREADS=1
if [[ "$EUID" -eq 0 ]]; then # Open MPI refuses root without these
    export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
fi

records="$work/records.tsv"
: > "$records"
failures=0


# run_timed ID CHAIN RANKS -- COMMAND...: stdout to WORK/ID.json, stderr to
# WORK/ID.err; appends one record. Never fails: a failed run is recorded.
run_timed() {
    local id="$1" chain="$2" ranks="$3"
    shift 4
    local start end busy_before busy_after rc=0
    echo "[$(date +%T)] $id: $*" >&2
    busy_before="$(busy_ticks)"
    start="$(date +%s.%N)"
    /usr/bin/time -v -o "$work/$id.time" timeout "$limit" "$@" \
        > "$work/$id.json" 2> "$work/$id.err" || rc=$?
    end="$(date +%s.%N)"
    busy_after="$(busy_ticks)"
    if [[ "$rc" -ne 0 && "$rc" -ne 3 ]]; then # 3: no unique distribution, still a result
        failures=$((failures + 1))
        echo "[$(date +%T)] $id failed with exit status $rc; last lines of its stderr:" >&2
        tail -n 5 "$work/$id.err" >&2 || true
    fi
    printf '%s\t%s\t%s\t%s\t%s\t%s\t%s\n' "$id" "$chain" "$ranks" "$rc" "$start" "$end" \
        "$((busy_after - busy_before))" >> "$records"
}

echo "work folder: $work" >&2
for spec in $chains; do
    name="${spec%%:*}"
    size="${spec#*:}"
    chain="$work/$name-$size.h5"
    case "$name" in
    tandem) args=(tandem --n1 "$size" --n2 "$size") ;;
    graph-walk) args=(graph-walk --nodes "$size" --degree 4) ;;
    *) die "unknown family '$name' in LONGRUN_ANALYSIS_CHAINS (tandem or graph-walk)" ;;
    esac
    run_timed "$name-$size-generate" "$name-$size" 1 -- "$family" "${args[@]}" -o "$chain"
    run_timed "$name-$size-check-1" "$name-$size" 1 -- "$longrun" check "$chain" --json
    run_timed "$name-$size-check-2" "$name-$size" 2 -- \
        mpirun -n 2 -x OMP_NUM_THREADS "$longrun" check "$chain" --json
    rm -f -- "$chain" # 10^7-state chains take about 0.5 GB each
done

{
    echo "Run started $started on $cores cores (nproc; CPU: ${cpu_model:-unknown}), $memory_gib GiB"
    echo "memory (free -g), commit $commit, OMP_NUM_THREADS=1, per-run timeout ${limit} s."
    echo "Command: LONGRUN_ANALYSIS_CHAINS=\"$chains\" $invocation"
    echo
    "$python" - "$records" "$work" "$(getconf CLK_TCK)" << 'PY'
import json
import re
import sys

records_path, work, ticks = sys.argv[1], sys.argv[2], int(sys.argv[3])
print("| chain | step | ranks | exit | whole command s | CPU s: user / sys / others "
      "| max RSS MiB | states | transitions | SCCs | closed classes | transient | within 30 s |")
print("|---|---|---:|---:|---:|---|---:|---:|---:|---:|---:|---:|---|")
with open(records_path) as f:
    for line in f:
        rid, chain, ranks, rc, start, end, busy = line.rstrip("\n").split("\t")
        seconds = float(end) - float(start)
        rss, cpu = "n/a", "n/a"
        try:
            with open(f"{work}/{rid}.time") as t:
                text = t.read()
            m = re.search(r"Maximum resident set size \(kbytes\): (\d+)", text)
            rss = f"{int(m.group(1)) / 1024:.0f}" if m else "n/a"
            user = re.search(r"User time \(seconds\): ([\d.]+)", text)
            system = re.search(r"System time \(seconds\): ([\d.]+)", text)
            if user and system:
                u, s = float(user.group(1)), float(system.group(1))
                # Busy CPU time of everything else on the machine meanwhile: noise.
                others = max(int(busy) / ticks - u - s, 0.0)
                cpu = f"{u:.1f} / {s:.1f} / {others:.1f}"
        except OSError:
            pass
        step = "generate" if rid.endswith("generate") else "check"
        cells = ["-"] * 5
        target = "-"
        if step == "check":
            try:
                with open(f"{work}/{rid}.json") as j:
                    r = json.load(j)
                cells = [f"{r['states']:,}", f"{r['transitions']:,}",
                         str(r["strongly_connected_components"]["count"]),
                         str(len(r["closed_classes"])), str(r["transient"]["count"])]
            except (OSError, ValueError, KeyError):
                cells = ["n/a"] * 5
            if ranks == "1":
                target = "yes" if seconds <= 30 and rc in ("0", "3") else "no"
        print(f"| {chain} | {step} | {ranks} | {rc} | {seconds:.2f} | {cpu} | {rss} | "
              + " | ".join(cells) + f" | {target} |")
PY
    echo
    echo "whole command s: date +%s.%N around the command: process (and mpirun) start-up,"
    echo "reading the chain file, the analysis and printing the report. max RSS:"
    echo "/usr/bin/time -v; under mpirun the largest single process it waited for."
    echo "CPU s: user and system seconds of the run (all its processes) and the busy CPU"
    echo "seconds of everything else on the machine meanwhile (/proc/stat): noise."
} | tee "$work/results.md"

if [[ "$failures" -ne 0 ]]; then
    echo "run_analysis.sh: $failures run(s) failed; their logs are in $work" >&2
    exit 1
fi
