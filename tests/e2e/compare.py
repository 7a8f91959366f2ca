#!/usr/bin/python3
"""`longrun compare`: several methods on several chains, judged from outside.

Usage: compare.py write OUT_DIR FAMILY_BINARY
       compare.py run OUT_DIR RANKS
       compare.py bad OUT_DIR
       compare.py help OUT_DIR

  write  OUT_DIR/tandem.h5 from the family generator (a 13 x 11 tandem line,
         ctmc), and Matrix Market files written here, without longrun:
           mm1k.mtx     M/M/1/K generator, K = 30, arrival 0.7, service 1, with its
                        diagonal (rows sum to 0): 31 states, 2K = 60 rates
                        (Kleinrock, Queueing Systems I, sec. 3.6, the finite
                        storage queue)
           walk.mtx     lazy random walk on 0..19 (stay 1/2, left 0.3, right
                        0.2, reflecting), a dtmc (rows sum to 1)
           ruin.mtx     gambler's ruin on 0..6, states 0 and 6 absorbing: no
                        unique stationary distribution (Grinstead & Snell,
                        Introduction to Probability, ch. 11)
           neither.mtx  rows summing to 0.5 and no negative diagonal: neither kind
  run    compare tandem.h5 mm1k.mtx walk.mtx ruin.mtx --methods linear,eigen on
         RANKS ranks with --json, --csv and --plot, then the same with --json -:
         exit 0; a JSON row per (chain, method); converged rows have residual <=
         tol, iterations and products > 0, a residual history with one time per
         entry; both methods converge on the three solvable chains; ruin's rows are
         skipped and name the missing unique distribution; states, transitions
         and kinds are the files' (mm1k told ctmc, walk told dtmc); the CSV has
         the header and the same rows; each PNG starts with the PNG signature
         and is larger than 5 kB; each SVG parses as XML and has a polyline in
         each method's own colour; stdout of --json - is one JSON object.
  bad    unknown method: exit 1, one line naming it; neither.mtx: exit 2, one
         line naming the file and its first row; --json and --plot into /proc
         (a folder no one can create files in, root included): exit 6 and no
         file under the final names; --json - with --csv -: exit 1.
  help   `compare --help`: exit 0, nothing on stderr; examples for one rank and
         mpirun, every option (--transposed with what it means), the meaning of
         the columns, which memory figure is reported, and the exit codes.
"""

import csv
import io
import json
import pathlib
import subprocess
import sys
import xml.etree.ElementTree as ET

import h5py

from e2e_common import check, finish, run

TOL = 1e-10
METHODS = ["linear", "eigen"]
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), sec. 5.2
MM_BANNER = "%%MatrixMarket matrix coordinate real general"


def write_mtx(path, n, entries):
    """entries: (row, column, value), 0-based."""
    with open(path, "w") as f:
        f.write(MM_BANNER + "\n")
        f.write(f"{n} {n} {len(entries)}\n")
        for i, j, v in entries:
            f.write(f"{i + 1} {j + 1} {v!r}\n")


def write(folder, family):
    folder.mkdir(parents=True, exist_ok=True)
    subprocess.run([family, "tandem", "--n1", "12", "--n2", "10", "-o", str(folder / "tandem.h5")],
                   check=True)
    K, lam, mu = 30, 0.7, 1.0
    e = []
    for i in range(K + 1):
        out = 0.0
        if i > 0:
            e.append((i, i - 1, mu))
            out += mu
        if i < K:
            e.append((i, i + 1, lam))
            out += lam
        e.append((i, i, -out))
    write_mtx(folder / "mm1k.mtx", K + 1, e)
    n = 20
    e = []
    for i in range(n):
        left, right = (i - 1 if i > 0 else i), (i + 1 if i < n - 1 else i)
        row = {}
        for j, p in ((i, 0.5), (left, 0.3), (right, 0.2)):
            row[j] = row.get(j, 0.0) + p
        e.extend((i, j, p) for j, p in sorted(row.items()))
    write_mtx(folder / "walk.mtx", n, e)
    e = [(0, 0, 1.0), (6, 6, 1.0)]
    for i in range(1, 6):
        e += [(i, i - 1, 0.6), (i, i + 1, 0.4)]
    write_mtx(folder / "ruin.mtx", 7, e)
    write_mtx(folder / "neither.mtx", 3, [(0, 1, 0.5), (1, 2, 0.5), (2, 0, 0.5)])
    return 0


def expected_chains(folder):
    with h5py.File(folder / "tandem.h5", "r") as f:
        tandem = (int(f["chain"].attrs["states"]), int(f["chain"].attrs["transitions"]))
    return {
        str(folder / "tandem.h5"): ("ctmc", False) + tandem,
        str(folder / "mm1k.mtx"): ("ctmc", True, 31, 60),
        str(folder / "walk.mtx"): ("dtmc", True, 20, 58),
        str(folder / "ruin.mtx"): ("dtmc", True, 7, 12),
    }


def check_json(report, chains, what):
    check(report.get("tolerance") == TOL, f"{what}: tolerance {report.get('tolerance')!r}")
    by_path = {c["path"]: c for c in report.get("chains", [])}
    for path, (kind, detected, states, transitions) in chains.items():
        c = by_path.get(path)
        if not check(c is not None, f"{what}: chain {path} missing"):
            continue
        check(c["kind"] == kind and c["kind_detected"] == detected,
              f"{what}: {path}: kind {c['kind']} detected {c['kind_detected']}")
        check(c["states"] == states and c["transitions"] == transitions,
              f"{what}: {path}: {c['states']} states, {c['transitions']} transitions, "
              f"expected {states}, {transitions}")
    runs = report.get("runs", [])
    pairs = [(r["chain"], r["method"]) for r in runs]
    expected_pairs = [(p, m) for p in chains for m in METHODS]
    check(sorted(pairs) == sorted(expected_pairs), f"{what}: rows {pairs}")
    for r in runs:
        where = f"{what}: {r['chain']} {r['method']}"
        if r["chain"].endswith("ruin.mtx"):
            check(r["status"] == "skipped" and "unique" in r["outcome"] and r["residual"] is None,
                  f"{where}: {r['status']} {r['outcome']!r}")
            continue
        check(r["status"] == "converged" and r["converged"] is True,
              f"{where}: did not converge: {r['outcome']!r}")
        if r["converged"]:
            check(isinstance(r["residual"], float) and 0 <= r["residual"] <= TOL,
                  f"{where}: residual {r['residual']!r} above {TOL}")
            check(r["iterations"] > 0 and r["matvecs"] > 0, f"{where}: {r['iterations']} "
                  f"iterations, {r['matvecs']} products")
            check(r["product_equivalents"] > 0 and r["wall_seconds"] > 0,
                  f"{where}: {r['product_equivalents']} product-equivalents, {r['wall_seconds']} s")
            check(r["peak_memory_bytes"] > 0, f"{where}: peak memory {r['peak_memory_bytes']}")
            h, t = r["history"], r["history_seconds"]
            check(len(h) > 0 and len(h) == len(t) and all(a <= b for a, b in zip(t, t[1:])),
                  f"{where}: history of {len(h)} residuals, {len(t)} times")
    return runs


def check_csv(text, runs, what):
    rows = list(csv.reader(io.StringIO(text)))
    if not check(len(rows) == len(runs) + 1, f"{what}: {len(rows)} lines for {len(runs)} runs"):
        return
    header = rows[0]
    for column in ("chain", "method", "status", "converged", "iterations", "matvecs",
                   "product_equivalents", "wall_seconds", "peak_memory_bytes", "residual",
                   "outcome"):
        check(column in header, f"{what}: no column {column!r} in {header}")
    table = [dict(zip(header, r)) for r in rows[1:]]
    for row, run_ in zip(table, runs):
        check((row["chain"], row["method"], row["status"]) ==
              (run_["chain"], run_["method"], run_["status"]), f"{what}: row {row} vs {run_}")
        if run_["residual"] is not None:
            check(abs(float(row["residual"]) - run_["residual"]) <= 1e-6 * run_["residual"],
                  f"{what}: residual {row['residual']} vs {run_['residual']}")


def hex_colour(stroke):
    return stroke.strip().lower()


def check_plots(folder, prefix, runs):
    solvable = ["tandem", "mm1k", "walk"]
    for stem in solvable:
        png = folder / f"{prefix}-{stem}.png"
        svg = folder / f"{prefix}-{stem}.svg"
        if check(png.exists(), f"{png} missing"):
            data = png.read_bytes()
            check(data.startswith(PNG_SIGNATURE), f"{png}: no PNG signature")
            check(len(data) > 5000, f"{png}: only {len(data)} bytes")
        if not check(svg.exists(), f"{svg} missing"):
            continue
        try:
            root = ET.parse(svg).getroot()
        except ET.ParseError as e:
            check(False, f"{svg}: not XML: {e}")
            continue
        lines = [el for el in root.iter() if el.tag.split("}")[-1] in ("polyline", "path")]
        strokes = {}
        for el in lines:
            stroke = el.get("stroke") or ""
            style = el.get("style") or ""
            for part in style.split(";"):
                if part.strip().startswith("stroke:"):
                    stroke = part.split(":", 1)[1]
            strokes.setdefault(hex_colour(stroke), 0)
            strokes[hex_colour(stroke)] += 1
        # The first two series colours of the chart (Okabe-Ito blue and vermillion).
        for method, colour in zip(METHODS, ("#0072b2", "#d55e00")):
            check(strokes.get(colour, 0) >= 1,
                  f"{svg}: no polyline in {method}'s colour {colour} (strokes {strokes})")
    for stem in ("ruin",):
        check(not (folder / f"{prefix}-{stem}.png").exists(), f"a plot for {stem}, not solved")


def run_mode(folder, ranks):
    chains = expected_chains(folder)
    launch = {"ranks": ranks} if ranks > 1 else {}
    js, cs = folder / f"compare_np{ranks}.json", folder / f"compare_np{ranks}.csv"
    prefix = f"plot_np{ranks}"
    args = ["compare", *chains, "--methods", ",".join(METHODS), "--tol", repr(TOL),
            "--json", str(js), "--csv", str(cs), "--plot", str(folder / prefix), "-q"]
    done = run(args, **launch)
    if not check(done.returncode == 0, f"compare: exit {done.returncode}: {done.stderr[-2000:]}"):
        return
    print(done.stdout)
    for method in METHODS:
        check(method in done.stdout, f"table lacks {method}")
    try:
        report = json.loads(js.read_text())
    except (OSError, json.JSONDecodeError) as e:
        check(False, f"{js}: {e}")
        return
    check(report.get("ranks") == ranks, f"ranks {report.get('ranks')}")
    runs = check_json(report, chains, str(js))
    check_csv(cs.read_text(), runs, str(cs))
    check_plots(folder, prefix, runs)

    done = run(["compare", str(folder / "mm1k.mtx"), "--methods", "linear", "--json", "-", "-q"],
               **launch)
    check(done.returncode == 0, f"--json -: exit {done.returncode}: {done.stderr[-2000:]}")
    try:
        report = json.loads(done.stdout)
        check(len(report["runs"]) == 1, f"--json -: {len(report['runs'])} runs")
    except (json.JSONDecodeError, KeyError) as e:
        check(False, f"--json -: stdout is not the JSON report ({e}): {done.stdout[:300]!r}")


def one_error_line(done, what):
    lines = [l for l in done.stderr.splitlines() if l.strip()]
    check(len(lines) == 1 and lines[0].startswith("longrun: error: "),
          f"{what}: stderr is not one error line: {done.stderr!r}")
    return lines[0] if lines else ""


def bad_mode(folder):
    mm1k = str(folder / "mm1k.mtx")
    done = run(["compare", mm1k, "--methods", "linear,warp"])
    check(done.returncode == 1, f"unknown method: exit {done.returncode}")
    check("warp" in one_error_line(done, "unknown method"), "the unknown method is not named")

    neither = str(folder / "neither.mtx")
    done = run(["compare", mm1k, neither, "--methods", "linear", "-q"])
    check(done.returncode == 2, f"neither kind: exit {done.returncode}")
    line = one_error_line(done, "neither kind")
    check(neither in line and "row 1" in line, f"neither kind: {line!r}")
    check("linear" not in done.stdout, "neither kind: runs were made before the input was refused")

    for option, final in (("--json", ["/proc/compare.json"]),
                          ("--plot", ["/proc/compare-mm1k.png", "/proc/compare-mm1k.svg"])):
        target = final[0] if option == "--json" else "/proc/compare"
        done = run(["compare", mm1k, "--methods", "linear", option, target, "-q"])
        check(done.returncode == 6, f"{option} into /proc: exit {done.returncode}: {done.stderr!r}")
        one_error_line(done, f"{option} into /proc")
        for f in final:
            check(not pathlib.Path(f).exists(), f"{f} exists")

    done = run(["compare", mm1k, "--json", "-", "--csv", "-"])
    check(done.returncode == 1, f"--json - --csv -: exit {done.returncode}")


HELP = [r"longrun compare \S+\.h5 \S+\.mtx", r"mpirun -n \d+ longrun compare", r"--methods",
        r"--tol", r"--json", r"--csv", r"--plot", r"--kind",
        r"--transposed\b.*column j lists the\s+transitions out of state j", r"--max-seconds",
        r"prod-equiv",
        r"peak .*after the run", r"skipped", r"Exit codes: 0 done", r"\b1 usage error",
        r"\b2 bad input", r"\b6 output not written"]


def help_mode():
    import re
    done = run(["compare", "--help"])
    check(done.returncode == 0 and done.stderr == "", f"--help: exit {done.returncode}, "
          f"stderr {done.stderr!r}")
    for pattern in HELP:
        check(re.search(pattern, done.stdout, re.S), f"--help lacks {pattern!r}")


def main(argv):
    if len(argv) < 3:
        raise SystemExit(__doc__)
    mode, folder = argv[1], pathlib.Path(argv[2])
    if mode == "write" and len(argv) == 4:
        return write(folder, argv[3])
    if mode == "run" and len(argv) == 4:
        run_mode(folder, int(argv[3]))
    elif mode == "bad" and len(argv) == 3:
        bad_mode(folder)
    elif mode == "help":
        help_mode()
    else:
        raise SystemExit(__doc__)
    return finish(f"compare {mode}")


if __name__ == "__main__":
    sys.exit(main(sys.argv))
