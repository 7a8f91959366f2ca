#!/usr/bin/env bash
# Benchmark: longrun against scipy's sparse direct solve on the tandem line family,
# side by side in one run, so that the machine's noise hits every solver alike.
#
#   benchmarks/run_tandem.sh [BUILD_DIR [WORK_DIR]]
#
# BUILD_DIR  a CMake build folder holding longrun and longrun-family (default: build)
# WORK_DIR   where chain, result and log files go (default: a fresh mktemp folder,
#            removed at the end unless LONGRUN_BENCH_KEEP=1 or a run failed)
#
# For each size (LONGRUN_BENCH_SIZES, default "1001 301": the N1 = N2 of
# `longrun-family tandem`, generator defaults otherwise) it runs, one after another:
#   longrun solve on 1 rank, longrun solve on 2 ranks (mpirun -n 2),
#   scipy_reference.py --method direct --pin 0 (state 0 is the chain's mode),
#   and for the sizes in LONGRUN_BENCH_EIGEN (default "301") longrun --method eigen.
# Each run is timed as a whole command (date +%s.%N around it) and under
# /usr/bin/time -v (max RSS); longrun's --json report gives wall_seconds, peak memory
# (largest rank), the certified residual and iterations. Every distribution is
# compared with scipy's (max absolute difference). A Markdown report goes to stdout
# and to WORK_DIR/results.md.
#
# OMP_NUM_THREADS=1 is set for every run: hypre under MPI is faster that way, a
# "rank" then means one core, and scipy (reference BLAS, SuperLU) is single-threaded.
# LONGRUN_BENCH_TIMEOUT (seconds, default 1800) caps each run.
# Exit status: 0 when every run succeeded, 1 otherwise (the report is written anyway).

set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
python=/usr/bin/python3 # Debian's python: numpy, scipy and h5py

invocation="$0${*:+ $*}"
build="${1:-build}"
work="${2:-}"
sizes="${LONGRUN_BENCH_SIZES:-1001 301}"
eigen_sizes="${LONGRUN_BENCH_EIGEN-301}" # set but empty: no eigen run
limit="${LONGRUN_BENCH_TIMEOUT:-1800}"

# shellcheck source=benchmarks/bench_common.sh
source "$(dirname "${BASH_SOURCE[0]}")/bench_common.sh"
require_binaries
"$python" -c 'import h5py, numpy, scipy' 2> /dev/null ||
    die "$python lacks h5py, numpy or scipy"

start_run tandem
for n in $sizes; do
    chain="$work/tandem-$n.h5"
    "$family" tandem --n1 "$n" --n2 "$n" -o "$chain" > "$work/tandem-$n.generate.log"
    tail -n 1 "$work/tandem-$n.generate.log" >&2

    run_timed "t$n-longrun-1" "$n" "longrun auto" 1 "$work/t$n-longrun-1.h5" must -- \
        "$longrun" solve "$chain" -o "$work/t$n-longrun-1.h5" --json -q
    run_timed "t$n-longrun-2" "$n" "longrun auto" 2 "$work/t$n-longrun-2.h5" must -- \
        mpirun -n 2 -x OMP_NUM_THREADS "$longrun" solve "$chain" \
        -o "$work/t$n-longrun-2.h5" --json -q
    run_timed "t$n-scipy" "$n" "scipy direct" 1 "$work/t$n-scipy.npy" must -- \
        "$python" "$here/scipy_reference.py" "$chain" --method direct --pin 0 \
        --out "$work/t$n-scipy.npy"
    for e in $eigen_sizes; do
        if [[ "$e" == "$n" ]]; then
            run_timed "t$n-longrun-eigen-1" "$n" "longrun eigen" 1 "$work/t$n-longrun-eigen-1.h5" must -- \
                "$longrun" solve "$chain" -o "$work/t$n-longrun-eigen-1.h5" --method eigen --json -q
        fi
    done
done


{
    echo "Run started $started on $cores cores (nproc; CPU: ${cpu_model:-unknown}), $memory_gib GiB"
    echo "memory (free -g), OMP_NUM_THREADS=1, per-run timeout ${limit} s."
    echo "Binaries: $version, built $built from ${source_dir:-an unknown source folder} ($source_commit)."
    echo "Command: LONGRUN_BENCH_SIZES=\"$sizes\" LONGRUN_BENCH_EIGEN=\"$eigen_sizes\" $invocation"
    echo
    "$python" - "$records" "$work" "$(getconf CLK_TCK)" << 'PY'
import json
import re
import sys

import h5py
import numpy as np

records_path, work, ticks = sys.argv[1], sys.argv[2], int(sys.argv[3])
runs = []
with open(records_path) as f:
    for line in f:
        rid, size, solver, ranks, rc, start, end, busy, output = line.rstrip("\n").split("\t")
        runs.append(dict(id=rid, size=int(size), solver=solver, ranks=int(ranks), rc=int(rc),
                         command=float(end) - float(start), busy=int(busy) / ticks,
                         output=output))


def usage(path):
    """(max RSS MiB, user + system CPU seconds) from /usr/bin/time -v."""
    try:
        with open(path) as f:
            text = f.read()
    except OSError:
        return None, None
    rss = re.search(r"Maximum resident set size \(kbytes\): (\d+)", text)
    cpu = [float(x) for x in re.findall(r"(?:User|System) time \(seconds\): ([\d.]+)", text)]
    return (int(rss.group(1)) / 1024 if rss else None), (sum(cpu) if len(cpu) == 2 else None)


def report(path):
    try:
        with open(path) as f:
            return json.loads(f.read())
    except (OSError, ValueError):
        return None


for r in runs:
    r["rss"], r["cpu"] = usage(f"{work}/{r['id']}.time")
    # CPU time the machine spent on anything but this run while it ran: noise.
    r["others"] = max(r["busy"] - r["cpu"], 0.0) if r["cpu"] is not None else None
    r["json"] = report(f"{work}/{r['id']}.json") if r["rc"] == 0 else None
    j = r["json"] or {}
    if r["solver"].startswith("longrun"):
        c = j.get("certificate", {})
        r["method"] = c.get("method")
        r["iterations"] = c.get("iterations")
        r["residual"] = c.get("residual")
        r["in_process"] = j.get("wall_seconds")
        r["solve"] = j.get("wall_seconds")
        peak = j.get("peak_memory_bytes_per_rank")
        r["peak"] = peak / 2**20 if peak is not None else None
    else:
        r["method"] = "direct, pin %s" % j.get("pin") if j else None
        r["iterations"] = None
        r["residual"] = j.get("residual")
        r["in_process"] = j.get("seconds_total")
        r["solve"] = j.get("seconds_solve")
        r["peak"] = j.get("peak_rss_mb")

distributions = {}
for r in runs:
    if r["rc"] != 0:
        continue
    try:
        if r["output"].endswith(".npy"):
            distributions[r["id"]] = np.load(r["output"])
        else:
            with h5py.File(r["output"], "r") as f:
                distributions[r["id"]] = f["/distribution"][...]
    except (OSError, KeyError):
        pass


def fmt(value, spec, missing="n/a"):
    return missing if value is None else format(value, spec)


sizes = []
for r in runs:
    if r["size"] not in sizes:
        sizes.append(r["size"])

print("| chain (states) | solver | ranks | method | iterations | certified residual "
      "| solve s | in-process s | whole command s | peak MiB/rank (report) | max RSS MiB "
      "| max abs diff vs scipy | CPU s: run / others |")
print("|---|---|---:|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|")
for size in sizes:
    reference = distributions.get(f"t{size}-scipy")
    for r in (r for r in runs if r["size"] == size):
        states = size * size
        diff = None
        if reference is not None and r["id"] in distributions and not r["id"].endswith("scipy"):
            d = distributions[r["id"]]
            if d.shape == reference.shape:
                diff = float(np.max(np.abs(d - reference)))
        status = "" if r["rc"] == 0 else f" (FAILED, exit {r['rc']})"
        print(f"| tandem {size}x{size} ({states:,}) | {r['solver']}{status} | {r['ranks']} "
              f"| {r['method'] or 'n/a'} | {fmt(r['iterations'], 'd', '-')} "
              f"| {fmt(r['residual'], '.2e')} | {fmt(r['solve'], '.2f')} "
              f"| {fmt(r['in_process'], '.2f')} | {r['command']:.2f} | {fmt(r['peak'], '.0f')} "
              f"| {fmt(r['rss'], '.0f')} | {fmt(diff, '.1e', '-')} "
              f"| {fmt(r['cpu'], '.1f')} / {fmt(r['others'], '.1f')} |")

print()
def ratio(a, b):
    return f"{a / b:.3g}x" if a is not None and b else "n/a"


print("| chain | longrun run | scipy solve / longrun solve | scipy in-process / longrun "
      "in-process | scipy command / longrun command |")
print("|---|---|---:|---:|---:|")
for size in sizes:
    scipy_run = next((r for r in runs if r["id"] == f"t{size}-scipy"), None)
    for r in (r for r in runs if r["size"] == size and r["solver"].startswith("longrun")):
        ok = scipy_run is not None and scipy_run["rc"] == 0 and r["rc"] == 0
        print(f"| tandem {size}x{size} | {r['solver']}, {r['ranks']} rank(s) "
              f"| {ratio(scipy_run['solve'], r['solve']) if ok else 'n/a'} "
              f"| {ratio(scipy_run['in_process'], r['in_process']) if ok else 'n/a'} "
              f"| {ratio(scipy_run['command'], r['command']) if ok else 'n/a'} |")
    one = next((r for r in runs if r["id"] == f"t{size}-longrun-1"), None)
    two = next((r for r in runs if r["id"] == f"t{size}-longrun-2"), None)
    if one and two and one["rc"] == 0 and two["rc"] == 0 and one["solve"] and two["solve"]:
        print(f"| tandem {size}x{size} | 2 ranks against 1 rank (speed-up) "
              f"| {ratio(one['solve'], two['solve'])} | {ratio(one['in_process'], two['in_process'])} "
              f"| {ratio(one['command'], two['command'])} |")
PY
    echo
    echo "solve s: longrun wall_seconds (read, assembly, analysis, solve, certificate and"
    echo "summaries; not MPI start-up, not writing the result file); scipy seconds_solve"
    echo "(spsolve only, factorisation included). in-process s: longrun wall_seconds;"
    echo "scipy seconds_total (read, assembly, solve, certificate; not the Python start-up)."
    echo "whole command s: date +%s.%N around the command, including process (and mpirun)"
    echo "start-up and writing the output file. peak MiB/rank (report): longrun's"
    echo "peak_memory_bytes_per_rank (largest rank), scipy's own ru_maxrss. max RSS:"
    echo "/usr/bin/time -v, which for mpirun is the largest single process it waited for."
    echo "CPU s: user + system seconds of the run (all its processes, /usr/bin/time -v) and"
    echo "the busy CPU seconds of everything else on the machine meanwhile (/proc/stat): noise."
} | tee "$work/results.md"

if [[ "$failures" -ne 0 ]]; then
    echo "run_tandem.sh: $failures run(s) failed; their logs are in $work" >&2
    exit 1
fi
