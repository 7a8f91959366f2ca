#!/usr/bin/python3
"""Markdown report of benchmarks/run_scaling.sh: per chain, the product split into
its parts and the solve split into its phases, on 1 and on 2 ranks, medians over
the rounds, and the speed-up of 2 ranks over 1.

  scaling_report.py RECORDS.tsv WORK_DIR CLOCK_TICKS_PER_SECOND
"""

import json
import os
import re
import statistics
import sys
from collections import defaultdict

PHASES = ["read", "structure", "partition", "assemble", "start", "solve", "summaries", "write"]


def time_v(path):
    """Max RSS (MiB) and user+system CPU seconds from /usr/bin/time -v."""
    rss = cpu = None
    try:
        with open(path) as f:
            text = f.read()
    except OSError:
        return rss, cpu
    m = re.search(r"Maximum resident set size \(kbytes\): (\d+)", text)
    if m:
        rss = int(m.group(1)) / 1024
    u = re.search(r"User time \(seconds\): ([\d.]+)", text)
    s = re.search(r"System time \(seconds\): ([\d.]+)", text)
    if u and s:
        cpu = float(u.group(1)) + float(s.group(1))
    return rss, cpu


def load_json(path):
    """The run's JSON report: the whole stdout, or else its last line that is one."""
    try:
        with open(path) as f:
            text = f.read()
    except OSError:
        return None
    try:
        return json.loads(text)
    except ValueError:
        pass
    for line in reversed(text.splitlines()):
        try:
            return json.loads(line)
        except ValueError:
            continue
    return None


def median(values):
    values = [v for v in values if v is not None]
    return statistics.median(values) if values else None


def fmt(value, digits=3, scale=1.0, unit=""):
    if value is None:
        return "-"
    return f"{value * scale:.{digits}g}{unit}"


def ratio(one, two):
    if one is None or two is None or two <= 0:
        return "-"
    return f"{one / two:.2f}x"


def memory_table(chain, by_kind, first, work):
    """Max RSS per method on 1 rank, against the chain as read (`longrun check`)."""
    memory = sorted(((kind[len("memory "):], rs[0]) for (kind, _), rs in by_kind.items()
                     if kind.startswith("memory ")), key=lambda m: (m[0] != "check", m[0]))
    if not memory or not first:
        return
    states, nonzeros = first["states"], first["nonzeros"]
    try:
        with open(os.path.join(work, chain + ".bytes")) as f:
            file_bytes = int(f.read())
        print(f"Chain file: {file_bytes / 2**20:,.0f} MiB on disk, {file_bytes / states:.0f} bytes "
              f"per state, {file_bytes / nonzeros:.1f} per nonzero of A.")
        print()
    except (OSError, ValueError):
        pass
    baseline = dict(memory).get("check", {}).get("rss")
    print("| 1 rank | exit | max RSS MiB | bytes per state | bytes per nonzero of A "
          "| above `check`: bytes per state |")
    print("|---|---|---:|---:|---:|---:|")
    for name, run in memory:
        rss = run["rss"]
        above = (rss - baseline) * 2**20 / states if rss and baseline and name != "check" else None
        label = "check (read + structure)" if name == "check" else f"solve --method {name}"
        exit_text = "124 (cut off)" if run["rc"] == 124 else str(run["rc"])
        print(f"| {label} | {exit_text} | {fmt(rss, 4)} "
              f"| {fmt(rss * 2**20 / states if rss else None, 3)} "
              f"| {fmt(rss * 2**20 / nonzeros if rss else None, 3)} | {fmt(above, 3)} |")
    print()


def main():
    records_path, work, ticks = sys.argv[1], sys.argv[2], float(sys.argv[3])
    runs = defaultdict(lambda: defaultdict(list))  # chain -> (kind, ranks) -> [run]
    generated = {}
    order = []
    with open(records_path) as f:
        for line in f:
            rid, chain, kind, ranks, rc, start, end, busy, _output = line.rstrip("\n").split("\t")
            if chain not in order:
                order.append(chain)
            rss, cpu = time_v(os.path.join(work, rid + ".time"))
            run = {
                "id": rid,
                "rc": int(rc) if rc.lstrip("-").isdigit() else rc,
                "seconds": float(end) - float(start),
                "rss": rss,
                "others_cpu": (int(busy) / ticks - cpu) if cpu is not None else None,
                "json": load_json(os.path.join(work, rid + ".json")),
            }
            if kind == "generate":
                generated[chain] = run
            else:
                runs[chain][(kind, int(ranks))].append(run)

    failed = [r["id"] for c in runs.values() for (kind, _), rs in c.items() for r in rs
              if r["rc"] != 0 and not kind.startswith("memory ")]
    for chain in order:
        g = generated.get(chain)
        first = next((r["json"] for r in runs[chain].get(("bandwidth", 1), []) if r["json"]), None)
        print(f"#### {chain}" + (f": {first['states']:,} states, {first['nonzeros']:,} nonzeros in A"
                                  if first else ""))
        print()
        if g:
            print(f"Generated in {g['seconds']:.2f} s (whole command, exit {g['rc']}, "
                  f"max RSS {fmt(g['rss'], 4)} MiB).")
            print()

        memory_table(chain, runs[chain], first, work)

        # The product and its parts.
        print("| ranks | product ms | on-rank block ms | off-rank block ms | halo exchange ms "
              "| x entries received (all ranks / busiest) | bytes received per product "
              "| product GB/s | triad GB/s | product speed-up |")
        print("|---:|---:|---:|---:|---:|---|---:|---:|---:|---:|")
        product = {}
        for ranks in (1, 2):
            js = [r["json"] for r in runs[chain].get(("bandwidth", ranks), []) if r["json"]]
            if not js:
                continue
            product[ranks] = median([j["seconds_per_product"] for j in js])
            split = [j.get("mpiaij_split") or {} for j in js]
            ghosts = split[0].get("ghost_entries")
            busiest = split[0].get("max_ghost_entries_per_rank")
            print(f"| {ranks} | {fmt(product[ranks], 3, 1e3)} "
                  f"| {fmt(median([s.get('diagonal_block_product_seconds') for s in split]), 3, 1e3)} "
                  f"| {fmt(median([s.get('off_diagonal_block_product_seconds') for s in split]), 3, 1e3)} "
                  f"| {fmt(median([s.get('halo_exchange_seconds') for s in split]), 3, 1e3)} "
                  f"| {f'{ghosts:,} / {busiest:,}' if ghosts is not None else '-'} "
                  f"| {f'{8 * ghosts:,}' if ghosts is not None else '-'} "
                  f"| {fmt(median([j['product_gbs'] for j in js]), 3)} "
                  f"| {fmt(median([j['triad_gbs'] for j in js]), 3)} "
                  f"| {ratio(product.get(1), product.get(ranks)) if ranks > 1 else '-'} |")
        print()

        # The solve and its phases.
        solves = {ranks: [r for r in runs[chain].get(("solve", ranks), []) if r["json"]]
                  for ranks in (1, 2)}
        if not any(solves.values()):
            print("No solve finished.")
            print()
            continue

        def phase(ranks, name):
            return median([next((p["seconds"] for p in r["json"].get("phase_seconds", [])
                                 if p["phase"] == name), None) for r in solves[ranks]])

        rows = [(name, {k: phase(k, name) for k in (1, 2)}) for name in PHASES]
        rows.append(("in-process (to the write)",
                     {k: median([r["json"]["wall_seconds"] for r in solves[k]]) for k in (1, 2)}))
        rows.append(("whole command", {k: median([r["seconds"] for r in solves[k]]) for k in (1, 2)}))
        print("| phase | 1 rank s | 2 ranks s | speed-up |")
        print("|---|---:|---:|---:|")
        for name, by in rows:
            if by[1] is None and by[2] is None:
                continue
            print(f"| {name} | {fmt(by[1], 3)} | {fmt(by[2], 3)} | {ratio(by[1], by[2])} |")
        print()
        details = []
        for ranks in (1, 2):
            rs = solves[ranks]
            if not rs:
                continue
            j = rs[0]["json"]
            walls = [r["seconds"] for r in rs]
            matvecs = sum(a["matvecs"] for a in j.get("attempts", []))
            solve_s = phase(ranks, "solve")
            per_product = (solve_s / matvecs) if solve_s and matvecs else None
            details.append(
                f"{ranks} rank(s): method {j['certificate']['method']}, "
                f"{j['certificate']['iterations']} iterations, {matvecs} products "
                f"({fmt(per_product, 3, 1e3)} ms of solve phase per product, "
                f"{fmt(per_product / product[ranks] if per_product and product.get(ranks) else None, 3)}"
                f" bare products' time), residual {j['certificate']['residual']:.2e}; "
                f"whole command {min(walls):.2f}-{max(walls):.2f} s over {len(rs)} rounds; "
                f"max RSS per process {fmt(median([r['rss'] for r in rs]), 4)} MiB; "
                f"others' CPU during the runs at most "
                f"{fmt(max((r['others_cpu'] or 0) for r in rs), 2)} s")
        for d in details:
            print(f"- {d}")
        print()

    if failed:
        print(f"Failed runs: {', '.join(failed)}")


if __name__ == "__main__":
    main()
