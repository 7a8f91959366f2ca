#!/usr/bin/python3
"""Markdown report of one run of benchmarks/run_suite.sh (printed to stdout).

  suite_report.py RECORDS WORK CLK_TCK TOLERANCE SCIPY_MAX_STATES

RECORDS holds one tab-separated line per run: id, chain, solver, ranks, exit status
(or "skipped"), start, end (date +%s.%N), busy clock ticks of the whole machine
meanwhile, output file ("-" for none). WORK/ID.json is the run's stdout, WORK/ID.time
its /usr/bin/time -v report.
"""

import json
import re
import sys

import h5py
import numpy as np


def read_json(path):
    try:
        with open(path) as f:
            return json.loads(f.read())
    except (OSError, ValueError):
        return None


def usage(path):
    """(max RSS MiB, user + system CPU seconds) from /usr/bin/time -v."""
    try:
        with open(path) as f:
            text = f.read()
    except OSError:
        return None, None
    rss = re.search(r"Maximum resident set size \(kbytes\): (\d+)", text)
    cpu = [float(x) for x in re.findall(r"(?:User|System) time \(seconds\): ([\d.]+)", text)]
    return (int(rss.group(1)) / 1024 if rss else None), (sum(cpu) if len(cpu) == 2 else None)


def fmt(value, spec, missing="n/a"):
    return missing if value is None else format(value, spec)


def ratio(a, b):
    return f"{a / b:.3g}x" if a is not None and b else "n/a"


def load_distribution(path):
    try:
        if path.endswith(".npy"):
            return np.load(path)
        with h5py.File(path, "r") as f:
            return f["/distribution"][...]
    except (OSError, KeyError, ValueError):
        return None


def describe_exit(r):
    if r["status"] == "skipped":
        return "skipped"
    rc = int(r["status"])
    if rc == 0:
        return "0"
    return {124: "124 (timeout)", 137: "137 (killed)"}.get(rc, str(rc))


def read_runs(records_path, work, ticks, tolerance):
    runs = []
    with open(records_path) as f:
        for line in f:
            rid, chain, solver, ranks, status, start, end, busy, output = line.rstrip(
                "\n"
            ).split("\t")
            runs.append(
                dict(
                    id=rid,
                    chain=chain,
                    solver=solver,
                    ranks=int(ranks),
                    status=status,
                    ok=status == "0",
                    command=float(end) - float(start) if status != "skipped" else None,
                    busy=int(busy) / ticks,
                    output=output,
                )
            )
    for r in runs:
        r["rss"], r["cpu"] = usage(f"{work}/{r['id']}.time")
        # CPU time the machine spent on anything but this run while it ran: noise.
        r["others"] = max(r["busy"] - r["cpu"], 0.0) if r["cpu"] is not None else None
        r["json"] = read_json(f"{work}/{r['id']}.json") if r["status"] != "skipped" else None
        j = r["json"] or {}
        r.update(method=None, iterations=None, residual=None, matvecs=None, solve=None,
                 in_process=None, certified=False, attempts=[])
        if r["solver"].startswith("longrun"):
            c = j.get("certificate", {})
            r["method"] = c.get("method")
            r["iterations"] = c.get("iterations")
            r["residual"] = c.get("residual")
            r["certified"] = r["ok"] and bool(c.get("certified"))
            r["attempts"] = j.get("attempts", [])
            if r["attempts"]:
                r["matvecs"] = sum(a.get("matvecs") or 0 for a in r["attempts"])
                r["solve"] = sum(a.get("seconds") or 0.0 for a in r["attempts"])
            r["in_process"] = j.get("wall_seconds")
        elif r["solver"].startswith("scipy"):
            if j.get("pin") is not None:
                r["method"] = f"{j.get('method')}, pin {j.get('pin')}"
            else:
                r["method"] = j.get("method")
            r["iterations"] = j.get("iterations")
            r["residual"] = j.get("residual")
            r["certified"] = (
                r["ok"] and r["residual"] is not None and r["residual"] <= tolerance
            )
            r["solve"] = j.get("seconds_solve")
            r["in_process"] = j.get("seconds_total")
    return runs


def attempts_text(attempts):
    parts = []
    for a in attempts:
        outcome = str(a.get("outcome") or "")
        if not a.get("matvecs") and not a.get("certified") and outcome:
            # A method that did not run (declined, not built): its reason, shortened.
            parts.append(f"{a.get('method')}: {outcome[:60]}")
            continue
        mark = "met" if a.get("certified") else "not met"
        parts.append(
            f"{a.get('method')}: {a.get('matvecs')} products, {fmt(a.get('seconds'), '.2f')} s, "
            f"{fmt(a.get('residual'), '.1e')} ({mark})"
        )
    # A '|' would split the Markdown cell.
    return "; ".join(parts).replace("|", "/") if parts else "-"


def chain_report(name, runs, work, tolerance, scipy_max_states):
    bandwidth = {r["ranks"]: r["json"] for r in runs if r["solver"] == "bandwidth" and r["json"]}
    states = nonzeros = None
    for j in bandwidth.values():
        states, nonzeros = j.get("states"), j.get("nonzeros")
    if states is None:
        for r in runs:
            if r["solver"].startswith("longrun") and r["json"]:
                states = r["json"].get("chain", {}).get("states")
    solvers = [r for r in runs if r["solver"].startswith(("longrun", "scipy"))]

    # The reference: the certified run with the smallest residual.
    certified = [r for r in solvers if r["certified"] and r["output"] != "-"]
    certified.sort(key=lambda r: r["residual"])
    reference = reference_id = None
    for r in certified:
        reference = load_distribution(r["output"])
        if reference is not None:
            reference_id = r["id"]
            break
    for r in solvers:
        r["diff"] = None
        if reference is None or not r["ok"] or r["output"] == "-":
            continue
        d = reference if r["id"] == reference_id else load_distribution(r["output"])
        if d is not None and d.shape == reference.shape:
            r["diff"] = float(np.max(np.abs(d - reference)))

    print(f"### {name}: {fmt(states, ',')} states, {fmt(nonzeros, ',')} nonzeros in A")
    print()
    generate = next((r for r in runs if r["solver"] == "generate"), None)
    if generate is not None:
        print(f"Generated in {fmt(generate['command'], '.2f')} s (whole command, exit "
              f"{describe_exit(generate)}, max RSS {fmt(generate['rss'], '.0f')} MiB).")
        print()

    print("| ranks | matrix | s/product: best / median | bytes/product (model) | product GB/s "
          "| triad GB/s | product / triad | same-size triad GB/s | product / same-size triad "
          "| off-diagonal nonzeros / ghosts |")
    print("|---:|---|---:|---:|---:|---:|---:|---:|---:|---|")
    for r in (r for r in runs if r["solver"] == "bandwidth"):
        j = r["json"]
        if not j:
            print(f"| {r['ranks']} | FAILED (exit {describe_exit(r)}) "
                  "| n/a | n/a | n/a | n/a | n/a | n/a | n/a | n/a |")
            continue
        split = j.get("mpiaij_split") or {}
        off = (f"{split['off_diagonal_block_nonzeros']:,} / {split['ghost_entries']:,}"
               if split else "-")
        print(f"| {j['ranks']} | {j['matrix_type']} "
              f"| {j['seconds_per_product'] * 1e3:.3g} / {j['median_seconds_per_product'] * 1e3:.3g} ms "
              f"| {j['bytes_per_product'] / 1e6:.3g} MB | {j['product_gbs']:.2f} "
              f"| {j['triad_gbs']:.2f} | {j['product_over_triad']:.0%} "
              f"| {j['triad_same_size_gbs']:.2f} | {j['product_over_triad_same_size']:.0%} "
              f"| {off} |")
    if 1 in bandwidth and 2 in bandwidth:
        one, two = bandwidth[1], bandwidth[2]
        print()
        print(f"2 ranks against 1 rank: product speed-up "
              f"{ratio(one['seconds_per_product'], two['seconds_per_product'])} (best times), "
              f"{ratio(one['median_seconds_per_product'], two['median_seconds_per_product'])} "
              f"(medians); triad bandwidth {ratio(two['triad_gbs'], one['triad_gbs'])}.")
    print()

    def product_equivalents(r):
        j = bandwidth.get(r["ranks"])
        if r["solve"] is None or not j:
            return None
        return r["solve"] / j["seconds_per_product"]

    print("| solver | ranks | exit | certified | residual | method | iterations | products "
          "| solve s | product-equivalents | in-process s | whole command s | max RSS MiB "
          "| max abs diff vs best | CPU s: run / others | attempts (longrun) |")
    print("|---|---:|---|---|---:|---|---:|---:|---:|---:|---:|---:|---:|---:|---|---|")
    for r in solvers:
        if r["status"] == "skipped":
            print(f"| {r['solver']} | {r['ranks']} | skipped: {fmt(states, ',')} states > "
                  f"{scipy_max_states:,} | - | - | - | - | - | - | - | - | - | - | - | - | - |")
            continue
        diff = "reference" if r["id"] == reference_id else fmt(r["diff"], ".1e", "-")
        print(f"| {r['solver']} | {r['ranks']} | {describe_exit(r)} "
              f"| {'yes' if r['certified'] else 'no'} | {fmt(r['residual'], '.2e')} "
              f"| {r['method'] or 'n/a'} | {fmt(r['iterations'], 'd', '-')} "
              f"| {fmt(r['matvecs'], 'd', '-')} | {fmt(r['solve'], '.2f')} "
              f"| {fmt(product_equivalents(r), '.0f')} | {fmt(r['in_process'], '.2f')} "
              f"| {fmt(r['command'], '.2f')} | {fmt(r['rss'], '.0f')} | {diff} "
              f"| {fmt(r['cpu'], '.1f')} / {fmt(r['others'], '.1f')} "
              f"| {attempts_text(r['attempts'])} |")
    print()

    scipy_runs = [r for r in solvers if r["solver"].startswith("scipy")]
    fastest = min((r for r in scipy_runs if r["certified"] and r["in_process"] is not None),
                  key=lambda r: r["in_process"], default=None)
    print("| scipy's fastest certified | longrun auto | scipy solve / longrun solve "
          "| scipy in-process / longrun in-process | scipy command / longrun command |")
    print("|---|---|---:|---:|---:|")
    for ranks in (1, 2):
        auto = next((r for r in solvers if r["solver"] == "longrun auto" and r["ranks"] == ranks),
                    None)
        if auto is None:
            continue
        where = f"{ranks} rank{'s' if ranks > 1 else ''}"
        if fastest is None:
            if scipy_runs and all(r["status"] == "skipped" for r in scipy_runs):
                why = f"skipped (more than {scipy_max_states:,} states)"
            else:
                why = "no certified scipy run"
            print(f"| {why} | {where} | n/a | n/a | n/a |")
        elif not auto["certified"]:
            print(f"| {fastest['solver']} | {where}: not certified | n/a | n/a | n/a |")
        else:
            print(f"| {fastest['solver']} | {where} | {ratio(fastest['solve'], auto['solve'])} "
                  f"| {ratio(fastest['in_process'], auto['in_process'])} "
                  f"| {ratio(fastest['command'], auto['command'])} |")
    print()


def main():
    records_path, work = sys.argv[1], sys.argv[2]
    ticks, tolerance, scipy_max_states = int(sys.argv[3]), float(sys.argv[4]), int(sys.argv[5])
    runs = read_runs(records_path, work, ticks, tolerance)
    chains = []
    for r in runs:
        if r["chain"] not in chains:
            chains.append(r["chain"])
    for name in chains:
        chain_report(name, [r for r in runs if r["chain"] == name], work, tolerance,
                     scipy_max_states)
    print(
        """Bandwidth: longrun-bandwidth on the chain's A = Q^T (or P^T) as `longrun solve`
assembles it. Byte model of a product: 8 + sizeof(PetscInt) bytes per nonzero (value,
column index), 8 + 8 + sizeof(PetscInt) per row (y written, x read once, row pointer);
triad: STREAM's a = b + s c, 24 bytes per element; "triad" on large arrays (main memory),
"same-size triad" on arrays as large as the product's traffic per rank. Rates from the
best of the timed repetitions. off-diagonal nonzeros / ghosts: on more than one rank,
the entries of MPIAIJ's off-diagonal block and the x entries fetched from other ranks.

Runs: certified means the certificate (dtmc ||pi P - pi||_1, ctmc ||pi Q||_1 /
max_i |q_ii|) is at most the tolerance and the run exited 0. products: longrun's
matvecs summed over its attempts. solve s: longrun's attempt seconds summed (the
methods, not reading, assembly and analysis); scipy's seconds_solve (the solver call,
factorisation included). product-equivalents: solve s over the best time of one
product on the same number of ranks. in-process s: longrun's wall_seconds (read,
assembly, analysis, solve, certificate, summaries); scipy's seconds_total (read,
assembly, solve, certificate; not the Python start-up). whole command s: date +%s.%N
around the command, with process (and mpirun) start-up and writing the output.
max RSS: /usr/bin/time -v, under mpirun the largest single process. max abs diff vs
best: against the distribution of the certified run with the smallest residual
("reference"). CPU s: user + system seconds of the run and the busy CPU seconds of
everything else on the machine meanwhile (/proc/stat): noise. scipy runs under an
address-space limit: a MemoryError there means the route does not fit, not a bug.
Ratios: scipy's fastest certified route by in-process time against longrun auto."""
    )


if __name__ == "__main__":
    main()
