#!/usr/bin/python3
"""Smoke test of benchmarks/run_suite.sh on tiny chains (no timing checks).

  check_suite.py RUN_SUITE_SH BUILD_DIR WORK_DIR

Runs the suite with tiny sizes, one longrun method and two scipy routes, scipy
skipped on the queues chain (64 states > 50), then reads WORK_DIR/results.md and
checks: every chain has its heading with the right state count, a bandwidth table
with rows for 1 and 2 ranks, a runs table with every expected row, and a ratio
table; longrun auto is certified on 1 and 2 ranks; every certified distribution
agrees with the chain's best certified one (which on the chains scipy solves is
scipy's own, residual about 1e-16) within the bounds of AGREEMENT.
"""

import os
import re
import shutil
import subprocess
import sys

TANDEM, ROOM, BLOCKS, BLOCK_SIZE, NODES = 6, 3, 4, 6, 40
EXPECTED_STATES = {
    "tandem": TANDEM * TANDEM,  # index = q1 * N2 + q2 (longrun-family tandem --help)
    # Every (room + 1)^3 combination is reachable (benchmarks/three_queues.yaml).
    "queues": (ROOM + 1) ** 3,
    "ncd": BLOCKS * BLOCK_SIZE,  # index = block * S + within (longrun-family ncd --help)
    "walk": NODES,  # index = node (longrun-family graph-walk --help)
}
METHODS = ["eigen"]
SCIPY_METHODS = ["direct", "eigs"]
SCIPY_MAX_STATES = 50  # below the queues chain's 64: its scipy rows say "skipped"
# How far a certified distribution (residual <= 1e-10) may lie from the best one.
# The error is at most about the residual times the chain's condition number
# (common practice); an NCD chain's grows like 1 / coupling (1e-4, the generator's
# default), so 1e-10 / 1e-4 = 1e-6 there. The others are well conditioned.
AGREEMENT = {"tandem": 1e-8, "queues": 1e-8, "ncd": 1e-6, "walk": 1e-8}

failures = []


def expect(condition, message):
    if not condition:
        failures.append(message)
        print("FAILED: " + message, file=sys.stderr)


def cells(line):
    return [c.strip() for c in line.strip().strip("|").split("|")]


def sections(text):
    """{chain: [lines]} from the '### chain: ...' headings on."""
    out, current = {}, None
    for line in text.splitlines():
        m = re.match(r"### (\w+): ([\d,]+) states", line)
        if m:
            current = m.group(1)
            out[current] = {"states": int(m.group(2).replace(",", "")), "lines": []}
        elif line.startswith("Bandwidth: "):
            current = None
        elif current:
            out[current]["lines"].append(line)
    return out


def tables(lines):
    """Consecutive '|' lines as tables: a list of (header cells, [row cells])."""
    found, block = [], []
    for line in lines + [""]:
        if line.startswith("|"):
            block.append(line)
        elif block:
            found.append((cells(block[0]), [cells(row) for row in block[2:]]))
            block = []
    return found


def main():
    script, build, work = sys.argv[1:4]
    env = dict(
        os.environ,
        LONGRUN_SUITE_TANDEM=str(TANDEM),
        LONGRUN_SUITE_QUEUE_ROOM=str(ROOM),
        LONGRUN_SUITE_NCD_BLOCKS=str(BLOCKS),
        LONGRUN_SUITE_NCD_BLOCK_SIZE=str(BLOCK_SIZE),
        LONGRUN_SUITE_WALK_NODES=str(NODES),
        LONGRUN_SUITE_WALK_DEGREE="4",
        LONGRUN_SUITE_METHODS=" ".join(METHODS),
        LONGRUN_SUITE_SCIPY_METHODS=" ".join(SCIPY_METHODS),
        LONGRUN_SUITE_SCIPY_MAX_STATES=str(SCIPY_MAX_STATES),
        LONGRUN_SUITE_REPEAT="3",
        LONGRUN_SUITE_TRIAD_MIB="2",
        LONGRUN_BENCH_TIMEOUT="60",
        LONGRUN_BENCH_KEEP="1",
    )
    shutil.rmtree(work, ignore_errors=True)  # no stale files from an earlier run
    done = subprocess.run(["bash", script, build, work], env=env, capture_output=True,
                          text=True, timeout=300)
    print(done.stderr, file=sys.stderr)
    expect(done.returncode == 0, f"run_suite.sh exited {done.returncode}")
    try:
        with open(os.path.join(work, "results.md")) as f:
            text = f.read()
    except OSError as e:
        expect(False, f"no results.md: {e}")
        text = ""
    expect(text.strip() and text == done.stdout, "results.md differs from the printed report")
    expect("Binaries: longrun" in text, "the report names no binaries")

    found = sections(text)
    expect(list(found) == list(EXPECTED_STATES), f"chains in the report: {list(found)}")
    for chain, states in EXPECTED_STATES.items():
        if chain not in found:
            continue
        expect(found[chain]["states"] == states,
               f"{chain}: {found[chain]['states']} states, expected {states}")
        t = tables(found[chain]["lines"])
        expect(len(t) == 3, f"{chain}: {len(t)} tables, expected 3")
        if len(t) != 3:
            continue
        (bw_head, bw_rows), (run_head, run_rows), (ratio_head, ratio_rows) = t
        expect(bw_head[0] == "ranks" and [r[0] for r in bw_rows] == ["1", "2"],
               f"{chain}: bandwidth rows {[r[0] for r in bw_rows]}")
        for r in bw_rows:
            expect(not r[1].startswith("FAILED"), f"{chain}: bandwidth on {r[0]} rank(s) failed")

        expected_rows = [("longrun auto", "1"), ("longrun auto", "2")]
        expected_rows += [(f"longrun {m}", "1") for m in METHODS]
        expected_rows += [(f"scipy {m}", "1") for m in SCIPY_METHODS]
        expect([(r[0], r[1]) for r in run_rows] == expected_rows,
               f"{chain}: run rows {[(r[0], r[1]) for r in run_rows]}")
        column = {name: i for i, name in enumerate(run_head)}
        for r in run_rows:
            if r[0].startswith("scipy") and chain == "queues":
                expect(r[2].startswith("skipped"), f"queues: scipy row not skipped: {r[2]}")
                continue
            if len(r) != len(run_head):
                expect(False, f"{chain}: row {r[:2]} has {len(r)} cells")
                continue
            if r[0] == "longrun auto":
                expect(r[column["certified"]] == "yes", f"{chain}: longrun auto on {r[1]} "
                       f"rank(s) not certified (exit {r[column['exit']]})")
            if r[column["certified"]] == "yes":
                diff = r[column["max abs diff vs best"]]
                expect(diff == "reference" or float(diff) <= AGREEMENT[chain],
                       f"{chain}: {r[0]} on {r[1]} rank(s) differs by {diff}")
        expect(ratio_head[0] == "scipy's fastest certified" and len(ratio_rows) == 2,
               f"{chain}: ratio table {ratio_head[:1]} with {len(ratio_rows)} rows")
        if chain == "queues":
            expect(all(r[0].startswith("skipped") for r in ratio_rows),
                   "queues: ratio rows do not say scipy was skipped")

    if failures:
        print(f"{len(failures)} check(s) failed", file=sys.stderr)
        return 1
    print("all suite checks passed")
    return 0


if __name__ == "__main__":
    sys.exit(main())
