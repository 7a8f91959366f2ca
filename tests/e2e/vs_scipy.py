#!/usr/bin/python3
"""longrun's distributions against SciPy's (benchmarks/scipy_reference.py
--method direct, sparse LU on the pinned system), to 1e-10 max abs.

Usage: vs_scipy.py REFERENCE.npy [--graph-walk CHAIN.h5] RESULT.h5...

With --graph-walk, the chain must be a simple random walk on an undirected
graph (row i: probability 1/deg(i) to each neighbour, neighbours symmetric), and
both SciPy's and longrun's vectors are also held against the closed form
pi(i) = deg(i) / 2|E| (D. A. Levin, Y. Peres, E. L. Wilmer, "Markov Chains and
Mixing Times", Sec. 1.5; the section number is recalled from memory) to 1e-10.
"""

import argparse
import sys

import numpy as np
import scipy.sparse as sp

from e2e_common import check, finish, read_chain, read_result

TOLERANCE = 1e-10


def graph_walk_closed_form(path):
    kind, offsets, targets, weights, _ = read_chain(path)
    n = offsets.size - 1
    degree = np.diff(offsets).astype(np.float64)
    check(kind == "dtmc", f"{path}: kind {kind}")
    p = sp.csr_matrix((weights, targets, offsets), shape=(n, n))
    adjacency = (p > 0).astype(np.int8)
    check((adjacency != adjacency.T).nnz == 0, f"{path}: the graph is not undirected")
    check(not p.diagonal().any(), f"{path}: a node links to itself")
    row_of = np.repeat(np.arange(n), np.diff(offsets))
    check(np.allclose(weights, 1.0 / degree[row_of], rtol=1e-15, atol=0),
          f"{path}: not a simple random walk (weights other than 1/deg)")
    return degree / degree.sum()


def main():
    parser = argparse.ArgumentParser(description=__doc__,
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("reference")
    parser.add_argument("--graph-walk", metavar="CHAIN.h5")
    parser.add_argument("results", nargs="+")
    args = parser.parse_args()

    ref = np.load(args.reference)
    if args.graph_walk:
        closed = graph_walk_closed_form(args.graph_walk)
        d = float(np.max(np.abs(ref - closed)))
        print(f"SciPy vs deg/2|E|: {d:.2e}")
        check(d <= TOLERANCE, f"SciPy's reference differs from deg/2|E| by {d:.3e}")
    for path in args.results:
        pi, _ = read_result(path)
        if not check(pi.shape == ref.shape, f"{path}: shape {pi.shape}, SciPy {ref.shape}"):
            continue
        d = float(np.max(np.abs(pi - ref)))
        print(f"{path}: max abs difference from SciPy {d:.2e}")
        check(d <= TOLERANCE, f"{path}: differs from SciPy by {d:.3e} (max abs) > {TOLERANCE}")
        if args.graph_walk:
            d = float(np.max(np.abs(pi - closed)))
            check(d <= TOLERANCE, f"{path}: differs from deg/2|E| by {d:.3e} > {TOLERANCE}")
    return finish("vs_scipy")


if __name__ == "__main__":
    sys.exit(main())
