#!/usr/bin/python3
"""Checks the tiny family instances that the family smoke tests generate and solve.

Usage: check_families.py DIR
DIR holds <family>.h5 from longrun-family and <family>_<method>.npy from
scipy_reference.py. Checks, with h5py and numpy only:
  - every chain file is structurally valid (schema v1) and its rows are exactly
    what the family's definition says;
  - M/M/c/K: pi equals the closed-form steady-state probabilities p_n
    (Gross and Harris, Fundamentals of Queueing Theory, the M/M/c/K model) to 1e-10;
  - graph walk: pi equals deg(i) / 2|E| (Levin, Peres and Wilmer, Markov Chains
    and Mixing Times, Sec. 1.5) to 1e-10;
  - the same seed gives the same graph, whatever the file layout;
  - the SciPy methods agree with each other on every family.
"""

import math
import pathlib
import sys

import h5py
import numpy as np

METHODS = ("direct", "gmres-ilu", "eigs")
failures = []


def check(condition, message):
    if not condition:
        failures.append(message)
    return condition


def text(value):
    if isinstance(value, (bytes, np.bytes_)):
        return value.decode("utf-8")
    return str(value)


def text_list(value):
    """A list attribute; the writer stores a one-element list as a scalar string."""
    if isinstance(value, (str, bytes, np.bytes_)):
        return [text(value)]
    return [text(v) for v in value]


def read(path):
    with h5py.File(path, "r") as f:
        c = {
            "schema": text(f.attrs["schema"]),
            "version": int(f.attrs["schema_version"]),
            "kind": text(f["chain"].attrs["kind"]),
            "states": int(f["chain"].attrs["states"]),
            "transitions": int(f["chain"].attrs["transitions"]),
            "offsets": f["chain/offsets"][...],
            "targets": f["chain/targets"][...],
            "weights": f["chain/weights"][...],
            "events": f["chain/events"][...] if "events" in f["chain"] else None,
            "event_names": text_list(f["chain"].attrs.get("event_names", [])),
            "variables": {},
            "bounds": {},
            "measures": {},
        }
        if "states" in f:
            s = f["states"]
            for name in text_list(s.attrs["order"]):
                c["variables"][name] = s[name][...]
                c["bounds"][name] = (s.attrs.get(name + ".lower"), s.attrs.get(name + ".upper"))
        if "measures" in f:
            for name in f["measures"]:
                c["measures"][name] = f["measures"][name][...]
    return c


def validate_structure(name, c):
    n, o, t, w = c["states"], c["offsets"], c["targets"], c["weights"]
    ok = check(c["schema"] == "longrun.chain" and c["version"] == 1, f"{name}: schema")
    ok &= check(o.dtype == np.uint64 and t.dtype == np.uint64, f"{name}: offsets/targets not u64")
    ok &= check(w.dtype == np.float64, f"{name}: weights not f64")
    ok &= check(o.size == n + 1 and o[0] == 0, f"{name}: offsets length or start")
    ok &= check(bool(np.all(np.diff(o.astype(np.int64)) >= 0)), f"{name}: offsets not monotone")
    ok &= check(int(o[-1]) == c["transitions"] == t.size == w.size, f"{name}: transition count")
    if not ok:
        return False
    rows = np.repeat(np.arange(n, dtype=np.uint64), np.diff(o).astype(np.int64))
    check(bool(np.all(t < n)), f"{name}: target out of range")
    same_row = rows[1:] == rows[:-1]
    check(bool(np.all(t[1:][same_row] > t[:-1][same_row])), f"{name}: targets not increasing")
    if c["kind"] == "ctmc":
        check(bool(np.all(w > 0)), f"{name}: ctmc rate not positive")
        check(bool(np.all(t != rows)), f"{name}: ctmc self-loop")
    else:
        check(bool(np.all(w >= 0)), f"{name}: negative probability")
        sums = np.bincount(rows.astype(np.int64), weights=w, minlength=n)
        check(bool(np.all(np.abs(sums - 1) < 1e-12)), f"{name}: dtmc rows do not sum to 1")
    if c["events"] is not None:
        check(c["events"].size == t.size, f"{name}: events length")
        check(bool(np.all(c["events"] < len(c["event_names"]))), f"{name}: event index")
    for var, values in c["variables"].items():
        check(values.size == n, f"{name}: variable {var} length")
        lower, upper = c["bounds"][var]
        if lower is not None:
            check(bool(np.all(values >= lower)), f"{name}: {var} below its lower bound")
        if upper is not None:
            check(bool(np.all(values <= upper)), f"{name}: {var} above its upper bound")
    return True


def triples(c):
    """The file's transitions as a sorted list of (source, target, weight, event)."""
    rows = np.repeat(np.arange(c["states"]), np.diff(c["offsets"]).astype(np.int64))
    ev = c["events"] if c["events"] is not None else np.zeros(rows.size, dtype=int)
    names = c["event_names"] or [""]
    return [
        (int(s), int(t), float(w), names[int(e)])
        for s, t, w, e in zip(rows, c["targets"], c["weights"], ev)
    ]


def same_transitions(name, got, expected):
    expected = sorted(expected)
    count_ok = len(got) == len(expected)
    if not check(count_ok, f"{name}: {len(got)} transitions, expected {len(expected)}"):
        return
    for g, e in zip(got, expected):
        if not check(
            g[:2] == e[:2] and g[3] == e[3] and abs(g[2] - e[2]) <= 1e-15 * abs(e[2]),
            f"{name}: transition {g} where the definition gives {e}",
        ):
            return


def check_tandem(c, n1, n2, lam, mu1, mu2):
    expected = []
    for x1 in range(n1):
        for x2 in range(n2):
            s = x1 * n2 + x2
            if x1 + 1 < n1:
                expected.append((s, s + n2, lam, "arrive"))
            if x1 > 0 and x2 + 1 < n2:
                expected.append((s, s - n2 + 1, mu1, "move"))
            if x2 > 0:
                expected.append((s, s - 1, mu2, "depart"))
    same_transitions("tandem", triples(c), expected)
    idx = np.arange(c["states"])
    check(np.array_equal(c["variables"]["q1"], idx // n2), "tandem: q1")
    check(np.array_equal(c["variables"]["q2"], idx % n2), "tandem: q2")
    check(np.array_equal(c["measures"]["in_system"], idx // n2 + idx % n2), "tandem: in_system")


def mmck_closed_form(c_servers, k, lam, mu):
    """p_n = p_0 a^n / n! for n < c and p_0 a^n / (c! c^(n-c)) for c <= n <= K, a = lam/mu."""
    a = lam / mu
    p = np.array(
        [
            a**n / math.factorial(n)
            if n < c_servers
            else a**n / (math.factorial(c_servers) * c_servers ** (n - c_servers))
            for n in range(k + 1)
        ]
    )
    return p / p.sum()


def check_mmck(c, servers, k, lam, mu, solutions):
    expected = []
    for n in range(k + 1):
        if n < k:
            expected.append((n, n + 1, lam, "arrive"))
        if n > 0:
            expected.append((n, n - 1, min(n, servers) * mu, "depart"))
    same_transitions("mmck", triples(c), expected)
    exact = mmck_closed_form(servers, k, lam, mu)
    for method, pi in solutions.items():
        err = float(np.abs(pi - exact).max())
        check(err <= 1e-10, f"mmck/{method}: max |pi - p_n| = {err:.2e} > 1e-10")


def check_graph_walk(c, solutions):
    n, o, t = c["states"], c["offsets"], c["targets"]
    deg = np.diff(o).astype(np.int64)
    rows = np.repeat(np.arange(n), deg)
    edges = set(zip(rows.tolist(), t.astype(np.int64).tolist()))
    check(all((j, i) in edges for i, j in edges), "graph-walk: graph is not symmetric")
    check(all(i != j for i, j in edges), "graph-walk: self-loop")
    check(
        all((i, (i + 1) % n) in edges for i in range(n)), "graph-walk: ring edge missing"
    )
    check(np.array_equal(c["weights"], 1.0 / deg[rows]), "graph-walk: P_ij != 1/deg(i)")
    check(np.array_equal(c["variables"]["degree"], deg), "graph-walk: degree variable")
    exact = deg / deg.sum()  # deg.sum() = 2|E|
    for method, pi in solutions.items():
        err = float(np.abs(pi - exact).max())
        check(err <= 1e-10, f"graph-walk/{method}: max |pi - deg/2|E|| = {err:.2e} > 1e-10")


def check_ncd(c, blocks, size):
    n, o, t = c["states"], c["offsets"], c["targets"].astype(np.int64)
    rows = np.repeat(np.arange(n), np.diff(o).astype(np.int64))
    names = np.array(c["event_names"])[c["events"]]
    cross = names == "cross"
    block_of = rows // size
    check(np.array_equal(np.bincount(rows[cross], minlength=n), np.ones(n)), "ncd: cross jumps")
    check(np.array_equal(t[cross] // size, (block_of[cross] + 1) % blocks), "ncd: cross target")
    check(np.array_equal(t[~cross] // size, block_of[~cross]), "ncd: local jump leaves its block")
    ring = set(zip(rows[~cross].tolist(), t[~cross].tolist()))
    check(
        all((s, (s // size) * size + (s % size + 1) % size) in ring for s in range(n)),
        "ncd: ring jump missing",
    )
    check(np.array_equal(c["variables"]["block"], np.arange(n) // size), "ncd: block")
    check(np.array_equal(c["variables"]["within"], np.arange(n) % size), "ncd: within")


def solutions_of(folder, family, states):
    out = {}
    for method in METHODS:
        path = folder / f"{family}_{method}.npy"
        if check(path.exists(), f"{family}: {path.name} missing"):
            pi = np.load(path)
            if check(pi.shape == (states,), f"{family}/{method}: wrong length"):
                out[method] = pi
    return out


def methods_agree(family, solutions):
    if "direct" not in solutions:
        return
    for method, pi in solutions.items():
        err = float(np.abs(pi - solutions["direct"]).max())
        check(err <= 1e-9, f"{family}: {method} differs from direct by {err:.2e}")


def main(folder):
    folder = pathlib.Path(folder)
    chains = {}
    for family in ("tandem", "mmck", "graph_walk", "graph_walk_again", "ncd"):
        path = folder / f"{family}.h5"
        if check(path.exists(), f"{path} missing"):
            chains[family] = read(path)
            if not validate_structure(family, chains[family]):
                del chains[family]
    # The instance parameters must match tests/benchmarks/CMakeLists.txt.
    for family, c in chains.items():
        if family == "graph_walk_again":
            continue
        solutions = solutions_of(folder, family, c["states"])
        methods_agree(family, solutions)
        if family == "tandem":
            check_tandem(c, 7, 5, 1.0, 1.1, 1.2)
        elif family == "mmck":
            check_mmck(c, 3, 12, 2.5, 1.0, solutions)
        elif family == "graph_walk":
            check_graph_walk(c, solutions)
        elif family == "ncd":
            check_ncd(c, 4, 6)
    if "graph_walk" in chains and "graph_walk_again" in chains:
        a, b = chains["graph_walk"], chains["graph_walk_again"]
        check(
            all(np.array_equal(a[k], b[k]) for k in ("offsets", "targets", "weights")),
            "graph-walk: the same seed gave a different graph",
        )
    for f in failures:
        print("FAIL", f)
    print(f"check_families: {len(chains)} chain files, {len(failures)} failures")
    return 1 if failures else 0


if __name__ == "__main__":
    if len(sys.argv) != 2:
        sys.exit(__doc__)
    sys.exit(main(sys.argv[1]))
