#!/usr/bin/python3
"""`longrun check` and `longrun solve` on chains whose structure is textbook
knowledge, written here with h5py (not by longrun), run on 1 or more ranks.

Usage: check_structure.py write OUT_DIR
       check_structure.py ruin|ehrenfest|solve-ruin OUT_DIR RANKS

  write       OUT_DIR/ruin.h5: gambler's ruin on 0..10 (up 0.4, down 0.6), a dtmc
              whose states 0 and 10 are absorbing and 1..9 transient (Grinstead &
              Snell, Introduction to Probability, ch. 11, absorbing chains);
              OUT_DIR/ehrenfest.h5: Ehrenfest urn with 12 balls, one closed class
              of period 2 (Feller, An Introduction to Probability Theory and Its
              Applications I, ch. XV). Both carry a state variable.
  ruin        `check --json`: exit 3; two closed classes, both absorbing and of
              period 1 (self-loops), representatives 0 and 10 described with their
              variable values; 9 transient states; 3 strongly connected
              components; not unique. Plain `check`: exit 3, the same verdict.
  ehrenfest   `check --json`: exit 0; one closed class of all 13 states, period
              2, no absorbing or transient states, representatives described;
              the verdict names the period.
  solve-ruin  `solve -o OUT`: exit 3, one line from longrun on stderr naming the
              file and saying there is no unique stationary distribution, nothing
              on stdout, and no file in OUT_DIR other than the two chains.
"""

import json
import pathlib
import sys

import h5py
import numpy as np

from e2e_common import check, finish, run

RUIN_N, RUIN_UP = 10, 0.4
URN_BALLS = 12


def write_chain(path, kind, rows, variable, values):
    """rows: one list of (target, weight) per state, targets increasing."""
    offsets = np.zeros(len(rows) + 1, dtype=np.uint64)
    offsets[1:] = np.cumsum([len(r) for r in rows])
    targets = np.array([t for r in rows for t, _ in r], dtype=np.uint64)
    weights = np.array([w for r in rows for _, w in r], dtype=np.float64)
    with h5py.File(path, "w") as f:
        f.attrs["schema"] = "longrun.chain"
        f.attrs["schema_version"] = np.uint64(1)
        g = f.create_group("chain")
        g.attrs["kind"] = kind
        g.attrs["states"] = np.uint64(len(rows))
        g.attrs["transitions"] = np.uint64(targets.size)
        g["offsets"] = offsets
        g["targets"] = targets
        g["weights"] = weights
        s = f.create_group("states")
        s.attrs["order"] = [variable]
        s[variable] = np.asarray(values, dtype=np.int64)


def write(folder):
    folder.mkdir(parents=True, exist_ok=True)
    ruin = []
    for i in range(RUIN_N + 1):
        if i in (0, RUIN_N):
            ruin.append([(i, 1.0)])
        else:
            ruin.append([(i - 1, 1 - RUIN_UP), (i + 1, RUIN_UP)])
    write_chain(folder / "ruin.h5", "dtmc", ruin, "fortune", range(RUIN_N + 1))
    urn = []
    for k in range(URN_BALLS + 1):
        row = []
        if k > 0:
            row.append((k - 1, k / URN_BALLS))
        if k < URN_BALLS:
            row.append((k + 1, (URN_BALLS - k) / URN_BALLS))
        urn.append(row)
    write_chain(folder / "ehrenfest.h5", "dtmc", urn, "first_urn", range(URN_BALLS + 1))
    return finish("write")


def parse(done, what):
    try:
        report = json.loads(done.stdout)
    except json.JSONDecodeError as e:
        check(False, f"{what}: stdout is not one JSON object ({e}): {done.stdout[:400]!r}")
        return None
    return report if check(isinstance(report, dict), f"{what}: not a JSON object") else None


def launch(ranks):
    return {"ranks": ranks} if ranks > 1 else {}


def longrun_lines(stderr):
    """Lines longrun itself wrote (mpirun adds its own banner on a non-zero exit)."""
    return [line for line in stderr.splitlines() if line.startswith("longrun")]


def ruin(folder, ranks):
    chain = str(folder / "ruin.h5")
    done = run(["check", chain, "--json"], **launch(ranks))
    check(done.returncode == 3, f"check --json: exit {done.returncode}, expected 3; "
          f"stderr {done.stderr[:400]!r}")
    report = parse(done, "check --json")
    if report is not None:
        check(report.get("unique_stationary_distribution") is False,
              f"unique_stationary_distribution {report.get('unique_stationary_distribution')!r}")
        check(report.get("states") == RUIN_N + 1, f"states {report.get('states')!r}")
        classes = report.get("closed_classes", [])
        if check(len(classes) == 2, f"closed_classes has {len(classes)} entries, expected 2"):
            for c, state in zip(classes, (0, RUIN_N)):
                check(c.get("size") == 1 and c.get("absorbing") is True,
                      f"class of state {state}: {c!r}")
                check(c.get("period") == 1, f"class of state {state}: period {c.get('period')!r}")
                check(c.get("representatives") == [state],
                      f"class representatives {c.get('representatives')!r}, expected [{state}]")
                check(c.get("described") == [f"state {state} (fortune={state})"],
                      f"class described {c.get('described')!r}")
        check(report.get("absorbing_states") == 2,
              f"absorbing_states {report.get('absorbing_states')!r}")
        transient = report.get("transient", {})
        check(transient.get("count") == RUIN_N - 1, f"transient count {transient.get('count')!r}")
        check(transient.get("representatives") == list(range(1, RUIN_N)),
              f"transient representatives {transient.get('representatives')!r}")
        check(transient.get("described", [])[:1] == ["state 1 (fortune=1)"],
              f"transient described {transient.get('described')!r}")
        scc = report.get("strongly_connected_components", {})
        check(scc.get("count") == 3, f"strongly connected components {scc!r}")
        check("no unique stationary distribution" in report.get("verdict", ""),
              f"verdict {report.get('verdict')!r}")
    plain = run(["check", chain], **launch(ranks))
    check(plain.returncode == 3, f"check: exit {plain.returncode}, expected 3")
    check("no unique stationary distribution" in plain.stdout,
          f"check: the verdict is not on stdout: {plain.stdout[-400:]!r}")
    return finish(f"check gambler's ruin np{ranks}")


def ehrenfest(folder, ranks):
    chain = str(folder / "ehrenfest.h5")
    done = run(["check", chain, "--json"], **launch(ranks))
    check(done.returncode == 0, f"check --json: exit {done.returncode}, expected 0; "
          f"stderr {done.stderr[:400]!r}")
    check(done.stderr == "", f"stderr is not empty: {done.stderr[:400]!r}")
    report = parse(done, "check --json")
    if report is not None:
        check(report.get("unique_stationary_distribution") is True,
              f"unique_stationary_distribution {report.get('unique_stationary_distribution')!r}")
        classes = report.get("closed_classes", [])
        if check(len(classes) == 1, f"closed_classes has {len(classes)} entries, expected 1"):
            c = classes[0]
            check(c.get("size") == URN_BALLS + 1, f"class size {c.get('size')!r}")
            check(c.get("period") == 2, f"period {c.get('period')!r}, expected 2")
            check(c.get("absorbing") is False, f"absorbing {c.get('absorbing')!r}")
            reps = c.get("representatives", [])
            check(reps == list(range(min(10, URN_BALLS + 1))), f"representatives {reps!r}")
            check(c.get("described", [])[:2] == ["state 0 (first_urn=0)", "state 1 (first_urn=1)"],
                  f"described {c.get('described')!r}")
        check(report.get("absorbing_states") == 0,
              f"absorbing_states {report.get('absorbing_states')!r}")
        check(report.get("transient", {}).get("count") == 0, f"transient {report.get('transient')!r}")
        check("period 2" in report.get("verdict", ""), f"verdict {report.get('verdict')!r}")
    return finish(f"check Ehrenfest urn np{ranks}")


def solve_ruin(folder, ranks):
    chain = str(folder / "ruin.h5")
    out = folder / f"ruin_result_np{ranks}.h5"
    before = sorted(p.name for p in folder.iterdir())
    done = run(["solve", chain, "-o", str(out), "-q"], **launch(ranks))
    check(done.returncode == 3, f"solve: exit {done.returncode}, expected 3")
    lines = longrun_lines(done.stderr)
    if check(len(lines) == 1, f"solve: {len(lines)} lines from longrun on stderr, expected 1: "
             f"{done.stderr[:600]!r}"):
        check(chain in lines[0], f"the line does not name {chain}: {lines[0]!r}")
        check("no unique stationary distribution" in lines[0], f"the line: {lines[0]!r}")
    if ranks == 1:
        check(len(done.stderr.splitlines()) == 1, f"stderr has other lines: {done.stderr!r}")
    check(done.stdout == "", f"stdout is not empty: {done.stdout[:400]!r}")
    after = sorted(p.name for p in folder.iterdir())
    check(not out.exists(), f"{out} was written")
    check(after == before, f"files appeared in {folder}: {sorted(set(after) - set(before))}")
    return finish(f"solve gambler's ruin np{ranks}")


def main(argv):
    if len(argv) < 3:
        raise SystemExit(__doc__)
    mode, folder = argv[1], pathlib.Path(argv[2])
    if mode == "write" and len(argv) == 3:
        return write(folder)
    if len(argv) != 4:
        raise SystemExit(__doc__)
    ranks = int(argv[3])
    jobs = {"ruin": ruin, "ehrenfest": ehrenfest, "solve-ruin": solve_ruin}
    if mode not in jobs:
        raise SystemExit(__doc__)
    return jobs[mode](folder, ranks)


if __name__ == "__main__":
    sys.exit(main(sys.argv))
