#!/usr/bin/python3
"""The result file's /summary/variables/<v>, recomputed in numpy.

Usage: summaries.py CHAIN.h5 RESULT.h5...

For every state variable v of the chain (/states/<v>, listed in the order
attribute), from the result's /distribution pi:
  values  the distinct values of v, increasing (must match exactly)
  pmf     P(v = values[i]) = sum of pi over the states with that value
  tail    P(v >= values[i])
  mean, std (population standard deviation)
  q50, q90, q99, q999: the smallest value x with P(v <= x) >= p
Numbers must agree to 1e-12 (absolute; relative for |x| > 1). A quantile is a
value, not a number that rounds: it must be exactly the smallest value whose
cdf reaches p - 1e-12, or a value up to the one whose cdf reaches p + 1e-12
(the cdf may sit within rounding of p).
"""

import sys

import h5py
import numpy as np

from e2e_common import check, finish, read_chain

AGREE = 1e-12
LEVELS = {"q50": 0.50, "q90": 0.90, "q99": 0.99, "q999": 0.999}


def close(a, b):
    return abs(a - b) <= AGREE * max(1.0, abs(b))


def expected_marginal(states, pi):
    values, inverse = np.unique(states.astype(np.float64), return_inverse=True)
    pmf = np.bincount(inverse, weights=pi, minlength=values.size)
    tail = np.cumsum(pmf[::-1])[::-1]
    mean = float(np.sum(values * pmf))
    std = float(np.sqrt(max(np.sum((values - mean) ** 2 * pmf), 0.0)))
    return values, pmf, tail, mean, std


def quantile_range(values, pmf, p):
    """Values acceptable as the p-quantile, given cdf rounding of 1e-12."""
    cdf = np.cumsum(pmf)
    lo = int(np.argmax(cdf >= p - AGREE)) if np.any(cdf >= p - AGREE) else values.size - 1
    hi = int(np.argmax(cdf >= p + AGREE)) if np.any(cdf >= p + AGREE) else values.size - 1
    return values[lo], values[hi]


def check_result(chain_variables, path):
    with h5py.File(path, "r") as f:
        pi = f["distribution"][...]
        group = f.get("summary/variables")
        if not check(group is not None, f"{path}: no /summary/variables"):
            return
        check(sorted(group.keys()) == sorted(chain_variables),
              f"{path}: summaries {sorted(group.keys())}, chain variables "
              f"{sorted(chain_variables)}")
        for name, states in chain_variables.items():
            if not check(name in group, f"{path}: no /summary/variables/{name}"):
                continue
            g = group[name]
            values, pmf, tail, mean, std = expected_marginal(states, pi)
            where = f"{path}: /summary/variables/{name}"
            got_values = g["values"][...]
            if not check(np.array_equal(got_values, values),
                         f"{where}/values {got_values[:10]}..., expected {values[:10]}..."):
                continue
            for label, expected in (("pmf", pmf), ("tail", tail)):
                got = g[label][...]
                d = float(np.max(np.abs(got - expected)))
                check(d <= AGREE, f"{where}/{label} differs by {d:.3e}")
            a = dict(g.attrs)
            for label, expected in (("mean", mean), ("std", std)):
                got = float(a[label])
                check(close(got, expected), f"{where} {label} {got!r}, numpy {expected!r}")
            for label, p in LEVELS.items():
                got = float(a[label])
                lo, hi = quantile_range(values, pmf, p)
                check(lo <= got <= hi and got in values,
                      f"{where} {label} = {got!r}, numpy says {lo!r}"
                      + ("" if lo == hi else f" to {hi!r}"))
            print(f"{where}: mean {float(a['mean']):.10g} (numpy {mean:.10g}), "
                  f"std {float(a['std']):.6g}, q50/q90/q99/q999 "
                  f"{a['q50']:g}/{a['q90']:g}/{a['q99']:g}/{a['q999']:g}")


def main(argv):
    if len(argv) < 3:
        raise SystemExit(__doc__)
    _, _, _, _, variables = read_chain(argv[1])
    check(len(variables) > 0, f"{argv[1]}: the chain has no state variables to summarise")
    for path in argv[2:]:
        check_result(variables, path)
    return finish("summaries")


if __name__ == "__main__":
    sys.exit(main(sys.argv))
