#!/usr/bin/python3
"""End-to-end checks of `longrun convert` and `longrun solve` on rw136.mtx.

tests/data/README.md describes the file: a 136-state random walk stored as P,
whose row 134 (1-based, as Matrix Market counts) lacks one entry of 1/30.

Usage:
  rw136.py refused DIR          convert without --renormalize must be refused:
                                exit 2, one stderr line naming the file and
                                row 134, and nothing written into DIR
  rw136.py renormalize OUT.h5   convert with --renormalize must succeed and
                                report the one corrected row and its correction
  rw136.py distribution R.h5... every result's /distribution against SciPy's
                                solution of the renormalised matrix
  rw136.py roundtrip BACK.mtx   the chain written back as Matrix Market equals
                                the renormalised matrix

The reference is computed here, outside longrun: scipy.io.mmread reads the
file, every row is divided by its sum, and pi P = pi, sum(pi) = 1 is solved
two ways with SciPy's dense LAPACK routines: LU on the system with one equation
replaced by the normalisation, and the null space of (P - I)^T by SVD. The two
must agree before longrun is judged against them.
"""

import os
import pathlib
import re
import shutil
import sys

import numpy as np
import scipy.io
import scipy.linalg

from e2e_common import check, finish, read_chain, read_result, run, source_dir

STATES = 136
ENTRIES = 479
FILE_ROW = 134  # 1-based row of the file that is short by 1/30


def mtx_path():
    return os.path.join(source_dir(), "tests", "data", "rw136.mtx")


def renormalised():
    """P read by SciPy with every row divided by its sum (CSR), and the raw row sums."""
    raw = scipy.io.mmread(mtx_path()).tocsr()
    sums = np.asarray(raw.sum(axis=1)).ravel()
    p = raw.multiply(1.0 / sums[:, None]).tocsr()
    p.sort_indices()
    return p, sums


def refused(folder):
    folder = pathlib.Path(folder)
    shutil.rmtree(folder, ignore_errors=True)
    folder.mkdir(parents=True)
    out = folder / "out.h5"
    done = run(["convert", mtx_path(), str(out), "--kind", "dtmc"])
    check(done.returncode == 2, f"exit status {done.returncode}, expected 2 (bad input)")
    lines = [l for l in done.stderr.splitlines() if l.strip()]
    check(len(lines) == 1, f"expected one stderr line, got {len(lines)}: {done.stderr!r}")
    line = lines[0] if lines else ""
    check(mtx_path() in line, f"the error does not name the file: {line!r}")
    # Row 134 as the file counts its rows (Matrix Market is 1-based).
    check(re.search(rf"\brow {FILE_ROW}\b", line) is not None,
          f"the error does not name row {FILE_ROW} of the file: {line!r}")
    check(done.stdout.strip() == "", f"unexpected stdout: {done.stdout!r}")
    left = sorted(p.name for p in folder.iterdir())
    check(left == [], f"a refused conversion left files behind: {left}")


def renormalize(out):
    out = pathlib.Path(out)
    out.unlink(missing_ok=True)
    done = run(["convert", mtx_path(), str(out), "--kind", "dtmc", "--renormalize"])
    check(done.returncode == 0, f"exit status {done.returncode}, stderr {done.stderr!r}")
    check(out.exists(), f"{out} was not written")
    match = re.search(r"renormali[sz]ed (\d+) row\(s\), largest correction ([0-9.eE+-]+)",
                      done.stdout)
    if check(match is not None, f"stdout does not report the correction: {done.stdout!r}"):
        _, sums = renormalised()
        # The only row beyond the default tolerance 1e-8 is the short one.
        expected = float(np.abs(sums - 1).max())
        check(abs(expected - 1 / 30) < 1e-8, f"reference: largest |row sum - 1| = {expected}")
        check(int(match.group(1)) == 1, f"{match.group(1)} rows renormalised, expected 1")
        reported = float(match.group(2))
        check(abs(reported - expected) <= 1e-8 * expected,
              f"reported correction {reported}, row sums say {expected}")
    if out.exists():
        kind, offsets, targets, weights, _ = read_chain(out)
        check(kind == "dtmc", f"kind {kind}")
        check(offsets.size == STATES + 1 and targets.size == ENTRIES,
              f"{offsets.size - 1} states, {targets.size} transitions")


def reference():
    p, _ = renormalised()
    dense = p.toarray()
    a = (dense - np.eye(STATES)).T
    # LU with the normalisation replacing equation 0.
    pinned = a.copy()
    pinned[0, :] = 1.0
    b = np.zeros(STATES)
    b[0] = 1.0
    by_lu = scipy.linalg.solve(pinned, b)
    # Null space by SVD: one-dimensional for an irreducible chain.
    basis = scipy.linalg.null_space(a, rcond=1e-12)
    check(basis.shape[1] == 1, f"null space of (P - I)^T has dimension {basis.shape[1]}")
    by_svd = basis[:, 0] / basis[:, 0].sum()
    check(np.all(by_lu > 0), "reference has non-positive entries")
    agree = np.max(np.abs(by_svd - by_lu) / by_lu)
    check(agree <= 1e-7, f"the two SciPy references differ by {agree:.2e} (relative)")
    print(f"reference: min entry {by_lu.min():.3e}, LU vs SVD relative {agree:.2e}, "
          f"residual {np.abs(by_lu @ dense - by_lu).sum():.2e}")
    return by_lu


def distribution(results):
    ref = reference()
    for path in results:
        pi, cert = read_result(path)
        if not check(pi.shape == (STATES,), f"{path}: /distribution has shape {pi.shape}"):
            continue
        absolute = np.max(np.abs(pi - ref))
        relative = np.max(np.abs(pi - ref) / ref)
        print(f"{path}: max abs error {absolute:.2e}, max relative error {relative:.2e}, "
              f"certificate {float(cert['residual']):.2e}, ranks {int(cert['ranks'])}")
        check(absolute <= 1e-10, f"{path}: max abs error {absolute:.3e} > 1e-10")
        check(relative <= 1e-6, f"{path}: max relative error {relative:.3e} > 1e-6")
        check(float(cert["residual"]) <= 1e-12, f"{path}: certificate {cert['residual']}")
        check(int(cert["converged"]) == 1, f"{path}: converged = {cert['converged']}")


def roundtrip(back):
    p, _ = renormalised()
    q = scipy.io.mmread(back).tocsr()
    q.sort_indices()
    if not check(q.shape == p.shape, f"{back}: shape {q.shape}"):
        return
    check(q.nnz == ENTRIES, f"{back}: {q.nnz} entries, expected {ENTRIES}")
    same_pattern = (np.array_equal(q.indptr, p.indptr) and np.array_equal(q.indices, p.indices))
    if check(same_pattern, f"{back}: the nonzero pattern differs from rw136.mtx"):
        relative = np.max(np.abs(q.data - p.data) / np.abs(p.data))
        print(f"{back}: max relative difference {relative:.2e}")
        check(relative <= 1e-15, f"{back}: entries differ by {relative:.3e} (relative) > 1e-15")


def main(argv):
    if len(argv) < 2:
        raise SystemExit(__doc__)
    step, args = argv[1], argv[2:]
    {"refused": lambda: refused(args[0]),
     "renormalize": lambda: renormalize(args[0]),
     "distribution": lambda: distribution(args),
     "roundtrip": lambda: roundtrip(args[0])}[step]()
    return finish(f"rw136 {step}")


if __name__ == "__main__":
    sys.exit(main(sys.argv))
