#!/usr/bin/python3
"""Stationary distribution of a longrun chain file with SciPy, as an outside reference.

Reads the chain file with h5py, solves with one of three SciPy routes and prints
one JSON line:
  {"method", "states", "seconds_solve", "seconds_total", "residual", ...}

  direct     pinned system A x = e_pin with A = Q^T (ctmc) or P^T - I (dtmc),
             row `pin` replaced by e_pin, sparse LU (scipy.sparse.linalg.spsolve)
  gmres-ilu  the same pinned system, GMRES preconditioned with an incomplete LU
             (scipy.sparse.linalg.spilu)
  eigs       ARPACK (scipy.sparse.linalg.eigs, k=1, which='LR') on P^T; a ctmc is
             uniformised first, P = I + Q / max_i |q_ii|

The result is normalised to sum 1 and judged by the certificate of DESIGN.md:
dtmc ||pi P - pi||_1, ctmc ||pi Q||_1 / max_i |q_ii|. A solver's own convergence
flag is reported but never trusted in place of the certificate.

Pin: the row replaced is --pin, or a guess (see guess_pin); with a guess, a
certificate above --retry-above triggers one more solve pinned at the first
solution's mode, reported as first_pin / first_residual.

Timing: seconds_solve covers only the solver call(s) (factorisation included);
seconds_total covers reading, assembly, the choice of pin, the solve and the
certificate, but not the Python start-up and imports.

Run with Debian's /usr/bin/python3 (numpy, scipy and h5py from the distribution).
"""

import argparse
import json
import resource
import sys
import time

import h5py
import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as sla


def text(value):
    if isinstance(value, (bytes, np.bytes_)):
        return value.decode("utf-8")
    if isinstance(value, np.ndarray):
        return text(value[()] if value.shape == () else value[0])
    return str(value)


def load(path):
    with h5py.File(path, "r") as f:
        if text(f.attrs.get("schema", "")) != "longrun.chain":
            raise SystemExit(f"{path}: not a longrun chain file (schema attribute missing)")
        g = f["chain"]
        kind = text(g.attrs["kind"])
        if kind not in ("ctmc", "dtmc"):
            raise SystemExit(f"{path}: unknown chain kind '{kind}'")
        offsets = g["offsets"][...].astype(np.int64)
        targets = g["targets"][...].astype(np.int64)
        weights = g["weights"][...].astype(np.float64)
    n = offsets.size - 1
    rows = sp.csr_matrix((weights, targets, offsets), shape=(n, n))
    return kind, rows


def generator_parts(kind, rows):
    """Returns (M, scale): the matrix whose transpose, minus the identity for a
    dtmc, is the system matrix, and the residual's scale (1 for a dtmc)."""
    if kind == "dtmc":
        return rows, 1.0
    # A rate from a state to itself does nothing, so self-loops are dropped.
    source = np.repeat(np.arange(rows.shape[0]), np.diff(rows.indptr))
    loops = rows.indices == source
    rates = rows
    if loops.any():
        rates = rows.copy()
        rates.data[loops] = 0.0
        rates.eliminate_zeros()
    exit_rates = np.asarray(rates.sum(axis=1)).ravel()
    q = (rates - sp.diags(exit_rates)).tocsr()
    scale = float(exit_rates.max()) if exit_rates.size else 1.0
    if scale <= 0:
        raise SystemExit("the ctmc has no transitions at all")
    return q, scale


def transition_matrix(kind, m, scale):
    """P itself (dtmc) or the uniformised I + Q / scale (ctmc)."""
    if kind == "dtmc":
        return m
    return (sp.identity(m.shape[0], format="csr") + m / scale).tocsr()


def guess_pin(kind, m, scale, steps):
    """A state that is hopefully of large stationary probability, cheaply.

    `steps` steps of the lazy chain (I + P) / 2 from the uniform vector, P being
    the chain itself (dtmc) or its uniformisation (ctmc); laziness rules out
    periodic oscillation. This is only a first guess: a few steps cannot carry
    mass across a large chain, and mass piles up first where outflow is blocked.
    On the 1001 x 1001 tandem family it picks the corner q1 = 1000, q2 = 0,
    whose stationary probability is about 1e-15; main() therefore judges the
    solution by its certificate and re-pins at the solution's mode if needed.
    """
    pt = transition_matrix(kind, m, scale).T.tocsr()
    x = np.full(m.shape[0], 1.0 / m.shape[0])
    for _ in range(steps):
        x = 0.5 * (x + pt @ x)
    return int(np.argmax(x))


def pinned_system(kind, m, pin):
    n = m.shape[0]
    a = m.T.tocsr()
    if kind == "dtmc":
        a = a - sp.identity(n, format="csr")
    keep = np.ones(n)
    keep[pin] = 0.0
    a = sp.diags(keep) @ a + sp.csr_matrix(([1.0], ([pin], [pin])), shape=(n, n))
    a.eliminate_zeros()
    b = np.zeros(n)
    b[pin] = 1.0
    return a.tocsc(), b


def solve_pinned(kind, m, pin, args):
    """Returns (x, seconds, details) for the system pinned at `pin`."""
    a, b = pinned_system(kind, m, pin)
    details = {}
    t0 = time.perf_counter()
    if args.method == "direct":
        x = sla.spsolve(a, b)
    else:
        ilu = sla.spilu(a, drop_tol=args.drop_tol, fill_factor=args.fill_factor)
        precond = sla.LinearOperator(a.shape, ilu.solve)
        iterations = [0]

        def count(_):
            iterations[0] += 1

        x, info = sla.gmres(
            a,
            b,
            M=precond,
            tol=args.tol,
            atol=0.0,
            restart=args.restart,
            maxiter=args.maxiter,
            callback=count,
            callback_type="pr_norm",
        )
        details = {"gmres_info": int(info), "iterations": iterations[0]}
    return x, time.perf_counter() - t0, details


def certificate(kind, m, scale, pi):
    if kind == "dtmc":
        return float(np.abs(m.T @ pi - pi).sum())
    return float(np.abs(m.T @ pi).sum() / scale)


def give_up(report, start, message):
    """Reports a solver failure as a JSON line too, so that harnesses see one format."""
    report.update(error=message, seconds_total=round(time.perf_counter() - start, 6))
    print(json.dumps(report), flush=True)
    print(message, file=sys.stderr)
    return 4


def main(argv=None):
    parser = argparse.ArgumentParser(
        description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter
    )
    parser.add_argument("chain", help="chain file (HDF5, longrun.chain schema v1)")
    parser.add_argument("--method", choices=("direct", "gmres-ilu", "eigs"), default="direct")
    parser.add_argument(
        "--pin",
        type=int,
        default=None,
        help="state whose row is replaced by e_pin (default: the most probable "
        "state after --pin-steps lazy power steps)",
    )
    parser.add_argument(
        "--pin-steps", type=int, default=50, metavar="K", help="power steps of the pin guess"
    )
    parser.add_argument(
        "--retry-above",
        type=float,
        default=1e-10,
        metavar="RES",
        help="with a guessed pin: if the certificate exceeds RES, solve again pinned "
        "at the first solution's mode (seconds_solve counts both solves)",
    )
    parser.add_argument("--tol", type=float, default=1e-12, help="gmres-ilu / eigs tolerance")
    parser.add_argument("--restart", type=int, default=50, help="gmres restart length")
    parser.add_argument(
        "--maxiter", type=int, default=1000, help="cap on gmres restarts / ARPACK iterations"
    )
    parser.add_argument("--drop-tol", type=float, default=1e-6, help="spilu drop tolerance")
    parser.add_argument("--fill-factor", type=float, default=20, help="spilu fill factor")
    parser.add_argument("--out", metavar="FILE.npy", help="save the distribution here")
    parser.add_argument(
        "--max-residual",
        type=float,
        default=None,
        help="exit with status 4 when the certificate is larger than this",
    )
    args = parser.parse_args(argv)

    start = time.perf_counter()
    kind, rows = load(args.chain)
    n = rows.shape[0]
    m, scale = generator_parts(kind, rows)
    del rows

    report = {"method": args.method, "states": n, "kind": kind}
    if args.method == "eigs":
        pt = transition_matrix(kind, m, scale).T.tocsr()
        t0 = time.perf_counter()
        if n < 3:  # ARPACK needs k < n - 1
            values, vectors = np.linalg.eig(pt.toarray())
            best = np.argmax(values.real)
            values, vectors = values[best : best + 1], vectors[:, best : best + 1]
        else:
            # A fixed start vector makes runs repeatable (ARPACK's own is random).
            try:
                values, vectors = sla.eigs(
                    pt, k=1, which="LR", v0=np.ones(n), tol=args.tol, maxiter=args.maxiter
                )
            except sla.ArpackNoConvergence as e:
                if e.eigenvectors.shape[1] == 0:
                    return give_up(report, start, f"ARPACK did not converge: {e}")
                # Whatever ARPACK has is still judged by the certificate below.
                values, vectors = e.eigenvalues, e.eigenvectors
                report["arpack_converged"] = False
        seconds_solve = time.perf_counter() - t0
        x = vectors[:, 0]
        x = np.real(x / x[np.argmax(np.abs(x))])
        report["eigenvalue"] = float(np.real(values[0]))
    else:
        pin = guess_pin(kind, m, scale, args.pin_steps) if args.pin is None else args.pin
        if not 0 <= pin < n:
            raise SystemExit(f"--pin {pin} is not a state (0..{n - 1})")
        report["pin"] = pin
        try:
            x, seconds_solve, details = solve_pinned(kind, m, pin, args)
        except RuntimeError as e:  # SuperLU: "Factor is exactly singular" and kin
            return give_up(report, start, str(e))
        report.update(details)
        # A guessed pin of tiny probability makes the system badly scaled (and
        # GMRES's stopping test meaningless): if the certificate says the
        # solution is poor, solve once more pinned at its mode, which even a
        # poor solution locates. An explicit --pin is taken as the user's choice.
        first = x / np.sum(x)
        if args.pin is None and args.retry_above is not None:
            first_residual = certificate(kind, m, scale, first)
            mode = int(np.argmax(first)) if np.all(np.isfinite(first)) else None
            if not first_residual <= args.retry_above and mode is not None and mode != pin:
                try:
                    x, seconds_retry, details = solve_pinned(kind, m, mode, args)
                except RuntimeError as e:
                    return give_up(report, start, str(e))
                report.update(
                    first_pin=pin, first_residual=first_residual, pin=mode, **details
                )
                seconds_solve += seconds_retry

    pi = np.asarray(x, dtype=np.float64) / np.sum(x)
    residual = certificate(kind, m, scale, pi)
    seconds_total = time.perf_counter() - start
    report.update(
        seconds_solve=round(seconds_solve, 6),
        seconds_total=round(seconds_total, 6),
        residual=residual,
        min_entry=float(pi.min()),
        peak_rss_mb=round(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, 1),
    )
    if args.out:
        np.save(args.out, pi)
    print(json.dumps(report), flush=True)
    if args.max_residual is not None and not residual <= args.max_residual:
        print(
            f"certificate {residual:.3e} exceeds --max-residual {args.max_residual:.3e}",
            file=sys.stderr,
        )
        return 4
    return 0


if __name__ == "__main__":
    sys.exit(main())
