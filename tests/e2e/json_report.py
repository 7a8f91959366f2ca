#!/usr/bin/python3
"""`longrun solve CHAIN --json` prints exactly one JSON object on stdout.

Usage: json_report.py CHAIN.h5 OUT_DIR RANKS

Runs, on RANKS ranks (mpirun for more than one):
  longrun solve CHAIN --json -q --tol 1e-12 -o OUT_DIR/json_npRANKS.h5
  longrun solve CHAIN --json --tol 1e-12          (progress lines on, same stdout rule)
and checks: exit 0; the whole of stdout parses as one JSON object (json.loads
refuses a second object or stray text); it has chain, ranks, attempts,
certificate and variables; certificate.certified is true with residual <= the
tolerance; ranks and chain.states are right; -q leaves stderr empty; the
variables are the chain's and their numbers are those written to the result file;
phase_seconds names the phases in the order they ran, and those up to the write add
up to wall_seconds (both come from one clock; the write comes after wall_seconds).
Every tail mass carries error_bound = error_estimate / 2 and resolved = (p >= 2 bound).

Then an M/M/1/K queue, rho = 0.5, K = 30: p_n = (1 - rho) rho^n / (1 - rho^(K+1))
[Gross & Harris, Fundamentals of Queueing Theory, "Finite queue M/M/1/K"], solved by
power iteration at --tol 1e-6: its tail P(n >= 30) = p_30 ~ 4.7e-10 is below the error
estimate, so it is unresolved with tol_to_resolve 1e-11, while P(n >= 4) ~ 6.3e-2 is
resolved; solved again at 1e-11 the same tail is resolved and within its error_bound
of the closed form.
"""

import json
import pathlib
import sys

import h5py

from e2e_common import check, finish, read_chain, run, text

TOL = 1e-12
KEYS = ("chain", "ranks", "attempts", "certificate", "variables", "phase_seconds", "wall_seconds")
# The phases of a solve with a unique answer, in order (structure analysis on).
PHASES = ["read", "structure", "partition", "assemble", "start", "solve", "summaries"]


def parse(done, what):
    check(done.returncode == 0, f"{what}: exit {done.returncode}, stderr {done.stderr!r}")
    try:
        report = json.loads(done.stdout)
    except json.JSONDecodeError as e:
        check(False, f"{what}: stdout is not one JSON object ({e}): {done.stdout[:400]!r}")
        return None
    if not check(isinstance(report, dict), f"{what}: stdout is JSON but not an object"):
        return None
    return report


def check_report(report, what, chain, ranks, variables):
    for key in KEYS:
        check(key in report, f"{what}: key {key!r} missing (has {sorted(report)})")
    if not all(key in report for key in KEYS):
        return
    cert = report["certificate"]
    check(cert.get("certified") is True, f"{what}: certificate.certified is {cert.get('certified')!r}")
    check(isinstance(cert.get("residual"), float) and cert["residual"] <= TOL,
          f"{what}: certificate.residual {cert.get('residual')!r}")
    check(cert.get("tolerance") == TOL, f"{what}: certificate.tolerance {cert.get('tolerance')!r}")
    check(report["ranks"] == ranks, f"{what}: ranks {report['ranks']!r}, ran {ranks}")
    check(report["chain"].get("states") == variables["__states__"],
          f"{what}: chain.states {report['chain'].get('states')!r}")
    check(report["chain"].get("path") == chain, f"{what}: chain.path {report['chain'].get('path')!r}")
    check(isinstance(report["attempts"], list) and len(report["attempts"]) >= 1
          and report["attempts"][-1].get("certified") is True,
          f"{what}: attempts {report['attempts']!r}")
    names = [v.get("name") for v in report["variables"]]
    check(names == variables["__order__"], f"{what}: variables {names}")
    phases = report["phase_seconds"]
    written = report.get("output") is not None
    order = [p.get("phase") for p in phases]
    check(order == PHASES + (["write"] if written else []), f"{what}: phases {order}")
    check(all(isinstance(p.get("seconds"), float) and p["seconds"] >= 0 for p in phases),
          f"{what}: phase seconds {phases}")
    before_write = sum(p["seconds"] for p in phases if p.get("phase") != "write")
    check(abs(before_write - report["wall_seconds"]) <= 1e-6 * max(1.0, report["wall_seconds"]),
          f"{what}: phases before the write add up to {before_write}, "
          f"wall_seconds {report['wall_seconds']}")
    bound = report.get("probability_error_bound")
    check(isinstance(bound, float) and bound == cert.get("error_estimate") / 2,
          f"{what}: probability_error_bound {bound!r}, "
          f"error_estimate {cert.get('error_estimate')!r}")
    for v in report["variables"]:
        marks = v.get("quantiles_resolved") or {}
        check(sorted(marks) == sorted(v["quantiles"])
              and all(isinstance(x, bool) for x in marks.values()),
              f"{what}: quantiles_resolved {marks} of {v['name']}")
        for t in v["tail"]:
            ok = (t.get("error_bound") == bound
                  and t.get("resolved") == (t["probability"] >= 2 * bound)
                  and (t.get("tol_to_resolve") is None) == t.get("resolved"))
            check(ok, f"{what}: tail {t} of {v['name']} with bound {bound}")


MM1K = """kind: ctmc
parameters: {arrival: 0.5, service: 1.0}
variables:
  n: {from: 0, to: 30}
start: {n: 0}
events:
  - name: arrive
    when: "n < 30"
    rate: arrival
    then: {n: "n + 1"}
  - name: leave
    when: "n > 0"
    rate: service
    then: {n: "n - 1"}
"""


def tail_at(report, value):
    for v in report["variables"]:
        for t in v["tail"]:
            if t["at_least"] == value:
                return t
    check(False, f"no tail P(n >= {value}) in {report['variables']}")
    return None


def check_queue_tails(folder, ranks, launch):
    k, rho = 30, 0.5
    p = [(1 - rho) * rho**n / (1 - rho ** (k + 1)) for n in range(k + 1)]
    # Per rank count: the np1 and np2 tests share the folder and may run at once.
    model, chain = folder / f"mm1k_np{ranks}.yaml", folder / f"mm1k_np{ranks}.h5"
    model.write_text(MM1K)
    done = run(["generate", str(model), "-o", str(chain), "--quiet"])
    if not check(done.returncode == 0, f"generate mm1k: exit {done.returncode}: {done.stderr}"):
        return
    coarse = parse(run(["solve", str(chain), "--method", "power", "--tol", "1e-6", "--json", "-q"],
                       **launch), "M/M/1/K at --tol 1e-6")
    if coarse is None:
        return
    far, near = tail_at(coarse, 30), tail_at(coarse, 4)
    if far and near:
        check(far["resolved"] is False and far["tol_to_resolve"] == 1e-11,
              f"--tol 1e-6: P(n >= 30) = {far} should be unresolved, --tol 1e-11")
        check(near["resolved"] is True
              and abs(near["probability"] - sum(p[4:])) <= near["error_bound"],
              f"--tol 1e-6: P(n >= 4) = {near}, closed form {sum(p[4:])}")
    fine = parse(run(["solve", str(chain), "--method", "power", "--tol", "1e-11", "--json", "-q"],
                     **launch), "M/M/1/K at --tol 1e-11")
    if fine is None:
        return
    far = tail_at(fine, 30)
    if far:
        check(far["resolved"] is True and abs(far["probability"] - p[30]) <= far["error_bound"],
              f"--tol 1e-11: P(n >= 30) = {far}, closed form {p[30]}")


def main(argv):
    if len(argv) != 4:
        raise SystemExit(__doc__)
    chain, folder, ranks = argv[1], pathlib.Path(argv[2]), int(argv[3])
    folder.mkdir(parents=True, exist_ok=True)
    _, offsets, _, _, chain_variables = read_chain(chain)
    expect = {"__states__": int(offsets.size - 1), "__order__": list(chain_variables)}
    launch = {"ranks": ranks} if ranks > 1 else {}
    out = folder / f"json_np{ranks}.h5"
    out.unlink(missing_ok=True)
    quiet = run(["solve", chain, "--json", "-q", "--tol", repr(TOL), "-o", str(out)], **launch)
    report = parse(quiet, "--json -q")
    # -q silences progress, never warnings (this tandem's bounds do hold mass).
    noise = [l for l in quiet.stderr.splitlines() if not l.startswith("longrun: warning: ")]
    check(noise == [], f"--json -q: stderr has more than warnings: {quiet.stderr[:400]!r}")
    if report is not None:
        check_report(report, "--json -q", chain, ranks, expect)
        check(report.get("output") == str(out), f"output {report.get('output')!r}")
        if check(out.exists(), f"{out} was not written"):
            with h5py.File(out, "r") as f:
                for v in report["variables"]:
                    g = f[f"summary/variables/{v['name']}"].attrs
                    pairs = [("mean", v["mean"], g["mean"]), ("std", v["std"], g["std"])]
                    for label, key in (("50", "q50"), ("90", "q90"), ("99", "q99"),
                                       ("99.9", "q999")):
                        pairs.append((key, v["quantiles"][label], g[key]))
                    for label, in_json, in_file in pairs:
                        check(in_json == float(in_file),
                              f"variable {v['name']} {label}: JSON {in_json!r}, "
                              f"result file {float(in_file)!r}")
                check(text(f["certificate"].attrs["method"]) == report["certificate"]["method"],
                      "certificate method differs between JSON and result file")

    chatty = run(["solve", chain, "--json", "--tol", repr(TOL)], **launch)
    report = parse(chatty, "--json with progress")
    if report is not None:
        check_report(report, "--json with progress", chain, ranks, expect)
    check(chatty.stderr.strip() != "", "without -q, no progress lines appeared on stderr")
    check_queue_tails(folder, ranks, launch)
    return finish(f"json_report np{ranks}")


if __name__ == "__main__":
    sys.exit(main(sys.argv))
