#!/usr/bin/python3
"""Same chain, different rank counts and methods: the same answer.

Usage: agree.py CHAIN.h5 --tol T RESULT.h5:RANKS:METHOD...

Every result must hold a certified certificate (/certificate attributes:
error_estimate <= T, tolerance = T, ranks = RANKS, method = METHOD,
converged = 1), a distribution that sums to 1 with no negative entry, a residual
that numpy recomputes from the chain file (dtmc ||pi P - pi||_1, ctmc
||pi Q||_1 / max_i |q_ii|) within T (a residual is at most twice the error), and
every pair of distributions must agree to 2 T in max abs (each is within T of
the exact one in the 1-norm).
"""

import argparse
import itertools
import sys

import numpy as np
import scipy.sparse as sp

from e2e_common import check, finish, read_chain, read_result, text



def residual(kind, offsets, targets, weights, pi):
    n = offsets.size - 1
    m = sp.csr_matrix((weights, targets, offsets), shape=(n, n))
    if kind == "dtmc":
        return float(np.abs(m.T @ pi - pi).sum())
    source = np.repeat(np.arange(n), np.diff(offsets))
    rates = np.where(targets == source, 0.0, weights)  # a rate to itself does nothing
    m = sp.csr_matrix((rates, targets, offsets), shape=(n, n))
    exit_rates = np.asarray(m.sum(axis=1)).ravel()
    return float(np.abs(m.T @ pi - exit_rates * pi).sum() / exit_rates.max())


def main():
    parser = argparse.ArgumentParser(description=__doc__,
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("chain")
    parser.add_argument("--tol", type=float, required=True)
    parser.add_argument("results", nargs="+", metavar="RESULT.h5:RANKS:METHOD")
    args = parser.parse_args()

    kind, offsets, targets, weights, _ = read_chain(args.chain)
    n = offsets.size - 1
    vectors = {}
    for spec in args.results:
        path, ranks, method = spec.rsplit(":", 2)
        pi, cert = read_result(path)
        if not check(pi.shape == (n,), f"{path}: /distribution has shape {pi.shape}, "
                                       f"the chain {n} states"):
            continue
        vectors[path] = pi
        recomputed = residual(kind, offsets, targets, weights, pi)
        print(f"{path}: ranks {int(cert['ranks'])}, method {text(cert['method'])}, "
              f"certificate {float(cert['residual']):.2e}, recomputed {recomputed:.2e}")
        check(float(cert["error_estimate"]) <= args.tol,
              f"{path}: estimated error {cert['error_estimate']} > {args.tol}")
        check(float(cert["residual"]) <= 2 * args.tol,
              f"{path}: certificate residual {cert['residual']} > 2 x {args.tol}")
        check(float(cert["tolerance"]) == args.tol,
              f"{path}: certificate tolerance {cert['tolerance']}, asked {args.tol}")
        check(int(cert["ranks"]) == int(ranks), f"{path}: ranks = {cert['ranks']}, ran {ranks}")
        check(int(cert["converged"]) == 1, f"{path}: converged = {cert['converged']}")
        check(text(cert["method"]) == method, f"{path}: method {text(cert['method'])}")
        check(recomputed <= args.tol, f"{path}: numpy's residual {recomputed:.3e} > {args.tol}")
        check(abs(pi.sum() - 1) <= 1e-12, f"{path}: sums to {pi.sum()!r}")
        check(pi.min() >= 0, f"{path}: negative entry {pi.min()!r}")
    worst = 0.0
    for (a, x), (b, y) in itertools.combinations(vectors.items(), 2):
        d = float(np.max(np.abs(x - y)))
        worst = max(worst, d)
        check(d <= 2 * args.tol, f"{a} and {b} differ by {d:.3e} (max abs) > {2 * args.tol}")
    print(f"largest pairwise difference {worst:.2e} over {len(vectors)} results")
    return finish("agree")


if __name__ == "__main__":
    sys.exit(main())
