#!/usr/bin/python3
"""`longrun sweep` end to end: an M/M/1/K queue swept over its arrival rate by the
binary (alone or under mpirun), judged from its CSV, JSON and plot files.

Usage: sweep.py OUT_DIR [RANKS]

Check values:
  M/M/1/K  K = 10, mu = 1: P(N = K) = (1 - rho) rho^K / (1 - rho^(K+1)), 1/(K+1) at
           rho = 1, and E[N] = sum n P(N = n)  [Gross & Harris, Fundamentals of
           Queueing Theory, section "Finite queue M/M/1/K"].
  Crossing of P(N = K) > 0.05: the closed-form root (bisection here) lies between the
           two values the sweep names, and the interpolated value is the line through
           those two points (common practice: linear interpolation).
Also: the CSV's columns, a PNG and an SVG per column, a job array (--only per
index, then --gather) giving the same table, and exit codes for bad input.
"""

import csv
import json
import math
import os
import shutil
import sys

from e2e_common import check, finish, run

K = 10
AGREE = 1e-8

# The M/M/1/K model (K = 10) shared with the C++ sweep test and the batch-job tests.
MODEL_FILE = os.path.join(os.path.dirname(os.path.abspath(__file__)), os.pardir, "support",
                          "models", "mm1k.yaml")


def p_n(lam, n):
    rho = lam  # mu = 1
    if abs(rho - 1) < 1e-12:
        return 1.0 / (K + 1)
    return (1 - rho) * rho**n / (1 - rho ** (K + 1))


def read_csv(path):
    with open(path, newline="") as f:
        rows = list(csv.reader(f))
    return rows[0], rows[1:]


def close(a, b, tol=AGREE):
    return abs(a - b) <= tol * max(1.0, abs(b))


def main():
    out, ranks = sys.argv[1], int(sys.argv[2]) if len(sys.argv) > 2 else 1
    on = ranks if ranks > 1 else None
    model = os.path.join(out, "mm1k.yaml")
    shutil.copyfile(MODEL_FILE, model)
    common = [model, "--vary", "arrival=0.5:1.5:0.1", "--tail", "full=queue==10",
              "--quantile", "queue:0.99", "--until", "P(full) > 0.05"]

    prefix = os.path.join(out, "one")
    done = run(["sweep", *common, "-o", prefix], ranks=on)
    check(done.returncode == 0, f"sweep exit {done.returncode}: {done.stderr}")
    header, rows = read_csv(prefix + ".csv")
    expected = ["arrival", "states", "method", "residual", "error_bound", "mean(queue)",
                "q0.99(queue)", "P(full)", "rate(arrive)", "rate(leave)"]
    check(header == expected, f"CSV header {header}, expected {expected}")
    col = {name: i for i, name in enumerate(header)}
    for r in rows:
        lam = float(r[col["arrival"]])
        check(close(float(r[col["P(full)"]]), p_n(lam, K)), f"P(full) at {lam}: {r}")
        # The bound every probability of the point carries (README "summarize").
        bound = float(r[col["error_bound"]])
        check(0 < bound <= 5e-11 and abs(float(r[col["P(full)"]]) - p_n(lam, K)) <= bound,
              f"P(full) at {lam} off by more than its error_bound: {r}")
        mean = sum(n * p_n(lam, n) for n in range(K + 1))
        check(close(float(r[col["mean(queue)"]]), mean), f"mean(queue) at {lam}: {r}")
        check(int(r[col["states"]]) == K + 1, f"states at {lam}: {r}")
    # Bisection on the closed form (increasing in rho).
    lo, hi = 0.5, 1.5
    for _ in range(200):
        mid = (lo + hi) / 2
        lo, hi = (mid, hi) if p_n(mid, K) < 0.05 else (lo, mid)
    root = (lo + hi) / 2
    with open(prefix + ".json") as f:
        table = json.load(f)
    crossing = table.get("crossing", {})
    check(crossing.get("crossed") is True, f"no crossing in the JSON: {crossing}")
    between = crossing.get("between") or [math.nan, math.nan]
    check(between[0] < root < between[1], f"root {root} not between {between}")
    check(abs(between[1] - between[0] - 0.1) < 1e-12, f"not neighbouring values: {between}")
    y0 = float(rows[-2][col["P(full)"]])
    y1 = float(rows[-1][col["P(full)"]])
    line = between[0] + (0.05 - y0) * (between[1] - between[0]) / (y1 - y0)
    check(close(crossing.get("interpolated", math.nan), line, 1e-12),
          f"interpolated {crossing.get('interpolated')}, line through the points {line}")
    check("crossed between arrival=" in done.stdout, "no crossing sentence on stdout")
    check("Caution:" in done.stdout, "no safety caution on stdout")
    check(len(table["rows"]) == len(rows), "JSON and CSV rows differ")
    for name in ["mean-queue", "q0.99-queue", "P-full", "rate-arrive", "rate-leave"]:
        png, svg = f"{prefix}-{name}.png", f"{prefix}-{name}.svg"
        if check(os.path.exists(png), f"no {png}"):
            with open(png, "rb") as f:
                check(f.read(8) == b"\x89PNG\r\n\x1a\n", f"{png} is not a PNG")
        if check(os.path.exists(svg), f"no {svg}"):
            with open(svg) as f:
                check("<svg" in f.read(), f"{svg} is not an SVG")
    check(not os.path.exists(prefix + ".work"), "the work folder was left behind")

    # A job array: each index alone, then --gather.
    array = os.path.join(out, "array")
    for i in range(11):
        done = run(["sweep", *common, "-o", array, "--only", str(i), "-q"], ranks=on)
        check(done.returncode == 0, f"--only {i} exit {done.returncode}: {done.stderr}")
    done = run(["sweep", "--gather", array], ranks=on)
    check(done.returncode == 0, f"--gather exit {done.returncode}: {done.stderr}")
    gathered_header, gathered = read_csv(array + ".csv")
    check(gathered_header == header, "gathered CSV header differs")
    check(len(gathered) == len(rows), f"gathered {len(gathered)} rows, one run {len(rows)}")
    for a, b in zip(gathered, rows):
        for name in header:
            if name in ("method", "residual", "error_bound"):
                continue
            check(close(float(a[col[name]]), float(b[col[name]]), 1e-10),
                  f"gathered {name} {a[col[name]]} against {b[col[name]]}")

    # Bad input: one line, exit 1 for usage, 2 for input.
    for args, code in [
        ([model, "--vary", "arrival=1:2", "-o", prefix], 1),
        ([model, "--vary", "lambda=1,2", "-o", prefix], 1),
        ([model, "--vary", "arrival=1,2", "--until", "P(empty) > 0.1", "-o", prefix], 1),
        ([os.path.join(out, "missing.yaml"), "--vary", "arrival=1,2", "-o", prefix], 2),
        (["--gather", os.path.join(out, "nothing")], 2),
    ]:
        done = run(["sweep", *args])
        check(done.returncode == code, f"{args}: exit {done.returncode}, expected {code}")
        lines = [l for l in done.stderr.splitlines() if l.strip()]
        check(len(lines) == 1 and lines[0].startswith("longrun: error:"),
              f"{args}: stderr {done.stderr!r}")
    return finish(f"sweep on {ranks} rank(s)")


if __name__ == "__main__":
    sys.exit(main())
