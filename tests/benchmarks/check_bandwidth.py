#!/usr/bin/python3
"""Smoke test of longrun-bandwidth on a tiny chain, 1 and 2 ranks (no timing checks).

  check_bandwidth.py MPIEXEC LONGRUN_BANDWIDTH CHAIN.h5

CHAIN.h5 is the tandem instance of tests/benchmarks/CMakeLists.txt
(`longrun-family tandem --n1 7 --n2 5`). Checks that each run prints one JSON
line whose sizes match the chain and whose derived numbers follow the byte model
stated in `longrun-bandwidth --help`, that two ranks see an off-diagonal block,
and that -bandwidth_mat_type converts the matrix.
"""

import json
import subprocess
import sys

import h5py
import numpy as np

N1, N2 = 7, 5
STATES = N1 * N2
# Transitions of the tandem line by its definition (`longrun-family tandem --help`):
# arrive when q1 < N1-1, move when q1 > 0 and q2 < N2-1, depart when q2 > 0.
TRANSITIONS = (N1 - 1) * N2 + (N1 - 1) * (N2 - 1) + N1 * (N2 - 1)
# A = Q^T keeps one stored diagonal entry per row (src/solve/assemble.cpp).
NONZEROS = TRANSITIONS + STATES

failures = []


def expect(condition, message):
    if not condition:
        failures.append(message)
        print("FAILED: " + message, file=sys.stderr)


def run(mpiexec, binary, chain, ranks, extra=()):
    command = [mpiexec, "-n", str(ranks), binary, chain, "--repeat", "3", "--triad-mib", "1",
               *extra]
    done = subprocess.run(command, capture_output=True, text=True, timeout=120)
    print(" ".join(command), "->", done.returncode, file=sys.stderr)
    print(done.stdout, done.stderr, sep="\n", file=sys.stderr)
    expect(done.returncode == 0, f"{ranks} rank(s) {list(extra)}: exit {done.returncode}")
    lines = [line for line in done.stdout.splitlines() if line.strip()]
    expect(len(lines) == 1, f"{ranks} rank(s): {len(lines)} output lines, expected 1 (rank 0)")
    try:
        return json.loads(lines[0]) if lines else {}
    except ValueError:
        expect(False, f"{ranks} rank(s): output is not JSON: {lines[0]!r}")
        return {}


def check_report(j, ranks, label):
    expect(j.get("ranks") == ranks, f"{label}: ranks {j.get('ranks')} != {ranks}")
    expect(j.get("states") == STATES, f"{label}: states {j.get('states')} != {STATES}")
    expect(j.get("nonzeros") == NONZEROS, f"{label}: nonzeros {j.get('nonzeros')} != {NONZEROS}")
    index = j.get("index_bytes")
    expect(index in (4, 8), f"{label}: index_bytes {index}")
    if index in (4, 8):
        model = NONZEROS * (8 + index) + STATES * (16 + index)
        expect(j.get("bytes_per_product") == model,
               f"{label}: bytes_per_product {j.get('bytes_per_product')} != {model}")
    best, median = j.get("seconds_per_product", 0), j.get("median_seconds_per_product", 0)
    expect(0 < best <= median, f"{label}: best {best} and median {median} seconds")
    if best > 0:
        expect(np.isclose(j.get("product_gbs", 0), j.get("bytes_per_product", 0) / best / 1e9),
               f"{label}: product_gbs is not bytes / seconds")
    for key in ("triad_gbs", "triad_same_size_gbs"):
        expect(j.get(key, 0) > 0, f"{label}: {key} = {j.get(key)}")
    if j.get("triad_gbs", 0) > 0 and j.get("triad_same_size_gbs", 0) > 0:
        expect(np.isclose(j["product_over_triad"], j["product_gbs"] / j["triad_gbs"]),
               f"{label}: product_over_triad")
        expect(np.isclose(j["product_over_triad_same_size"],
                          j["product_gbs"] / j["triad_same_size_gbs"]),
               f"{label}: product_over_triad_same_size")


def main():
    mpiexec, binary, chain = sys.argv[1:4]
    # The chain file itself must agree with the definition used above.
    with h5py.File(chain, "r") as f:
        offsets = f["chain/offsets"][...]
    expect(offsets.size - 1 == STATES and int(offsets[-1]) == TRANSITIONS,
           f"chain file: {offsets.size - 1} states, {int(offsets[-1])} transitions")

    one = run(mpiexec, binary, chain, 1)
    check_report(one, 1, "1 rank")
    expect(one.get("matrix_type") == "seqaij", f"1 rank: matrix {one.get('matrix_type')}")
    expect(one.get("mpiaij_split") is None, "1 rank: an MPIAIJ split on one rank")

    two = run(mpiexec, binary, chain, 2)
    check_report(two, 2, "2 ranks")
    expect(two.get("matrix_type") == "mpiaij", f"2 ranks: matrix {two.get('matrix_type')}")
    split = two.get("mpiaij_split") or {}
    # Rows split between two ranks: some jumps cross the split, in A = Q^T too.
    expect(0 < split.get("off_diagonal_block_nonzeros", 0) < NONZEROS,
           f"2 ranks: off-diagonal nonzeros {split.get('off_diagonal_block_nonzeros')}")
    expect(0 < split.get("ghost_entries", 0) < STATES,
           f"2 ranks: ghost entries {split.get('ghost_entries')}")

    sell = run(mpiexec, binary, chain, 2, ["--", "-bandwidth_mat_type", "sell"])
    expect(sell.get("matrix_type") == "mpisell", f"sell: matrix {sell.get('matrix_type')}")
    expect(sell.get("states") == STATES, f"sell: states {sell.get('states')}")

    if failures:
        print(f"{len(failures)} check(s) failed", file=sys.stderr)
        return 1
    print("all bandwidth checks passed")
    return 0


if __name__ == "__main__":
    sys.exit(main())
