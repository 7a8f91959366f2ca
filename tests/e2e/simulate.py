#!/usr/bin/python3
"""`longrun simulate` end to end through the real binary, alone and under mpirun:
exit codes and the JSON report.

Usage: simulate.py OUT_DIR [RANKS]

  agree     an M/M/1/K queue (generated from a model) solved, then simulated
            --against the result: exit 0, every quantity "ok"; the pooled
            occupancy near the closed form L = sum n p_n and the loss rate near
            lambda p_K, p_n the M/M/1/K law [Gross & Harris, Fundamentals of
            Queueing Theory, "M/M/1/K"]
  wrong     the same result with /distribution replaced (h5py) by the M/M/1/K
            law of another arrival rate: exit 5, the quantities named
  ruin      gambler's ruin (dtmc, two absorbing states) from the middle: the
            replications end at 0 or at N, the report says the chain is not
            ergodic from this start and pools nothing (exit 0)
  bad       --time on a dtmc, an unknown start state, no run length (exit 1);
            a missing chain (exit 2)
Sample sizes: the simulated estimates are checked within 2 half-widths of their
95 % interval (about 3.9 standard errors: a correct simulator misses with
probability ~1e-4; the seeds are fixed, so a pass is reproducible).
"""

import json
import math
import pathlib
import shutil
import sys

import h5py
import numpy as np

from check_structure import write_chain
from e2e_common import check, finish, run

LAMBDA, MU, K = 0.8, 1.0, 10

MM1K = f"""kind: ctmc
parameters: {{arrival: {LAMBDA}, service: {MU}, capacity: {K}}}
variables:
  n: {{from: 0, to: capacity}}
start: {{n: 0}}
events:
  - name: admit
    when: "n < capacity"
    rate: arrival
    then: {{n: "n + 1"}}
  - name: lose
    when: "n == capacity"
    rate: arrival
    then: {{n: "n"}}
  - name: depart
    when: "n > 0"
    rate: service
    then: {{n: "n - 1"}}
"""


def mm1k(lam):
    w = np.array([(lam / MU) ** n for n in range(K + 1)])
    return w / w.sum()


def simulate(args, ranks):
    return run(["simulate", *args, "--quiet"], ranks=ranks if ranks > 1 else None)


def one_line_error(done, code, words, what):
    lines = [l for l in done.stderr.splitlines() if l.startswith("longrun")]
    check(done.returncode == code, f"{what}: exit {done.returncode}, expected {code}: {done.stderr}")
    check(len(lines) == 1 and words in lines[0], f"{what}: expected one line with '{words}': "
          f"{done.stderr!r}")


def main(argv):
    out = pathlib.Path(argv[1])
    ranks = int(argv[2]) if len(argv) > 2 else 1
    out.mkdir(parents=True, exist_ok=True)

    model = out / "mm1k.yaml"
    model.write_text(MM1K)
    chain, result = out / "mm1k.h5", out / "mm1k-result.h5"
    done = run(["generate", str(model), "-o", str(chain), "--quiet"])
    check(done.returncode == 0, f"generate: exit {done.returncode}: {done.stderr}")
    done = run(["solve", str(chain), "-o", str(result), "--tol", "1e-12", "--quiet"])
    check(done.returncode == 0, f"solve: exit {done.returncode}: {done.stderr}")

    # agree
    p = mm1k(LAMBDA)
    length = ["--time", "3e5", "--warmup", "100", "--replications", "4", "--seed", "3"]
    done = simulate([str(chain), *length, "--against", str(result), "--json", "-"], ranks)
    check(done.returncode == 0, f"agree: exit {done.returncode}: {done.stderr}")
    report = json.loads(done.stdout) if done.returncode in (0, 5) else {}
    if report:
        check(report["ranks"] == ranks, f"agree: ranks {report['ranks']}")
        check(report["ergodic_from_start"], "agree: replications disagree")
        check(len(report["replications"]) == 4, "agree: not 4 replications")
        pooled = {e["name"]: e for e in report["pooled"]["estimates"]}
        check(all(e["agrees"] for e in pooled.values()), f"agree: flagged {pooled}")
        check(report["against"]["compared"] == len(pooled), "agree: not all compared")
        m = report["against"]["compared"]
        check(math.isclose(report["pooled"]["confidence"], 1 - 0.05 / m),
              f"agree: per-quantity level {report['pooled']['confidence']}, Bonferroni wants "
              f"{1 - 0.05 / m}")
        expected = {"n": float(np.dot(np.arange(K + 1), p)), "lose": LAMBDA * p[K]}
        for name, value in expected.items():
            e = pooled.get(name)
            if check(e is not None, f"agree: no estimate of {name}"):
                check(abs(e["mean"] - value) <= 2 * e["half_width"],
                      f"agree: {name} {e['mean']} +- {e['half_width']}, closed form {value}")
                check(abs(e["solved"] - value) <= 1e-9, f"agree: solved {name} {e['solved']}")

    # the same run gives the same numbers (seeded), as text this time
    done = simulate([str(chain), *length, "--against", str(result)], ranks)
    check(done.returncode == 0 and "agrees with" in done.stdout and " ok" in done.stdout,
          f"agree text: exit {done.returncode}: {done.stdout}")

    # wrong
    wrong = out / "wrong-result.h5"
    shutil.copy(result, wrong)
    with h5py.File(wrong, "r+") as f:
        f["distribution"][...] = mm1k(0.6)
    json_file = out / "wrong.json"
    done = simulate([str(chain), *length, "--against", str(wrong), "--json", str(json_file)],
                    ranks)
    check(done.returncode == 5, f"wrong: exit {done.returncode}, expected 5: {done.stderr}")
    check("DISAGREES" in done.stdout and "n" in done.stdout, f"wrong: {done.stdout}")
    if json_file.exists():
        report = json.loads(json_file.read_text())
        flagged = [e["name"] for e in report["pooled"]["estimates"] if e["agrees"] is False]
        check("n" in flagged and "lose" in flagged, f"wrong: flagged {flagged}")
        check(report["exit_code"] == 5, "wrong: JSON exit_code")
    else:
        check(False, "wrong: no JSON file written")

    # ruin: fortune 0..6, up with probability 0.5, absorbed at 0 and 6; start at 3
    n = 6
    rows = [[(i, 1.0)] if i in (0, n) else [(i - 1, 0.5), (i + 1, 0.5)] for i in range(n + 1)]
    ruin = out / "ruin.h5"
    write_chain(ruin, "dtmc", rows, "fortune", range(n + 1))
    done = simulate([str(ruin), "--steps", "10000", "--replications", "12", "--seed", "8",
                     "--from", "fortune=3", "--json", "-"], ranks)
    check(done.returncode == 0, f"ruin: exit {done.returncode}: {done.stderr}")
    if done.returncode == 0:
        report = json.loads(done.stdout)
        check(not report["ergodic_from_start"], "ruin: called ergodic")
        check(report["pooled"] is None, "ruin: pooled anyway")
        check("not ergodic from this start" in report["verdict"], report["verdict"])
        ends = {r["final_state"] for r in report["replications"]}
        check(ends == {0, n}, f"ruin: replications ended in {ends}, expected both 0 and {n}")
        check(all(r["absorbed"] for r in report["replications"]), "ruin: not all absorbed")
    done = simulate([str(ruin), "--steps", "10000", "--replications", "12", "--seed", "8",
                     "--from", "fortune=3"], ranks)
    check("not ergodic from this start" in done.stdout and "pooled" not in done.stdout,
          f"ruin text: {done.stdout}")

    # bad
    one_line_error(simulate([str(ruin), "--time", "10"], ranks), 1, "--steps", "--time on a dtmc")
    one_line_error(simulate([str(chain), "--time", "10", "--from", "n=99"], ranks), 1,
                   "no state of the chain", "unknown state")
    one_line_error(simulate([str(chain)], ranks), 1, "--time T or --steps N", "no run length")
    one_line_error(simulate([str(out / "nowhere.h5"), "--time", "10"], ranks), 2, "nowhere.h5",
                   "missing chain")
    # help: teaches the verdict, the adjustment and the exit codes
    done = run(["simulate", "--help"])
    for words in ["Bonferroni", "--against", "not ergodic from this start", "Exit codes:",
                  "5 the simulation", "longrun simulate chain.h5"]:
        check(words in done.stdout.replace("\n", " "), f"help: no '{words}'")
    done = run(["--help"])
    check("5 a simulation disagrees" in done.stdout, "main help: exit code 5 not listed")
    return finish(f"simulate np{ranks}")


if __name__ == "__main__":
    sys.exit(main(sys.argv))
