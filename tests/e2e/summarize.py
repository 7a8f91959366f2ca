#!/usr/bin/python3
"""`longrun summarize` end to end: models generated, solved and summarized by the
binary (alone and under mpirun), judged against closed forms from queueing theory.

Usage: summarize.py OUT_DIR [RANKS]

Check values (each computed here from its formula, with the source named):
  M/M/c/K   c=3, K=12, lambda=2.5, mu=1: p_n = a^n/n! p0 (n < c), a^n/(c! c^(n-c)) p0
            (c <= n <= K), a = lambda/mu  [Gross & Harris, Fundamentals of Queueing
            Theory, section "M/M/c/K"]. Tails P(n >= k) for every k, the 50/90/99/99.9 %
            quantiles and one asked for (99.99 %), mean, std, the mean queue length
            Lq = E[max(n - c, 0)] through --measure, E[n | n >= c] through --given,
            the loss rate lambda p_K (event "lose", an arrival at a full system),
            the throughput lambda (1 - p_K) (event "depart") and the fraction lost
            p_K through --rate (arrivals see time averages: PASTA, Wolff 1982).
  Erlang B  M/M/5/5 with offered load 3: loss rate = lambda B(5, 3), B by the
            recursion B(0) = 1, B(k) = a B(k-1) / (k + a B(k-1))  [Erlang's loss
            formula; Gross & Harris, "M/M/c/c"].
  Gordon-Newell  closed cyclic network of two exponential stations, N = 6 jobs,
            mu1 = 2, mu2 = 3: p(n1) proportional to (1/mu1)^n1 (1/mu2)^(N - n1), and
            the throughput X = G(N-1)/G(N) with G(n) = sum_k (1/mu1)^k (1/mu2)^(n-k)
            [Gordon & Newell, Operations Research 15(2), 1967; the ratio of
            normalising constants: Buzen, CACM 16(9), 1973].
  M/M/1/K   rho = 0.5, K = 30: p_n = (1 - rho) rho^n / (1 - rho^(K+1))  [Gross & Harris,
            "Finite queue M/M/1/K"]. Solved by power iteration at --tol 1e-6, the tail
            P(n >= 28) ~ 3.3e-9 is below the estimated error: marked unresolved with
            --tol 1e-10, while P(n >= 6) ~ 1.6e-2 is resolved; solved at 1e-10 the same
            tail is resolved and within its error_bound of the closed form.
Agreement: 1e-8 relative (the solve is certified to 1e-12 here).
"""

import csv
import hashlib
import io
import json
import math
import os
import sys

import h5py
import numpy as np

from e2e_common import check, finish, run

AGREE = 1e-8

MMCK = """kind: ctmc
parameters: {arrival: 2.5, service: 1.0, servers: 3, capacity: 12}
variables:
  n: {from: 0, to: capacity}
start: {n: 0}
events:
  - name: admit
    when: "n < capacity"
    rate: arrival
    then: {n: "n + 1"}
  - name: lose
    when: "n == capacity"
    rate: arrival
    then: {n: "n"}
  - name: depart
    when: "n > 0"
    rate: "min(n, servers) * service"
    then: {n: "n - 1"}
"""

ERLANG = """kind: ctmc
parameters: {arrival: 3.0, service: 1.0, lines: 5}
variables:
  busy: {from: 0, to: lines}
start: {busy: 0}
events:
  - name: connect
    when: "busy < lines"
    rate: arrival
    then: {busy: "busy + 1"}
  - name: blocked
    when: "busy == lines"
    rate: arrival
    then: {busy: "busy"}
  - name: hang_up
    when: "busy > 0"
    rate: "busy * service"
    then: {busy: "busy - 1"}
"""

CYCLIC = """kind: ctmc
parameters: {jobs: 6, rate1: 2.0, rate2: 3.0}
variables:
  at_first: {from: 0, to: jobs}
start: {at_first: 6}
events:
  - name: serve1
    when: "at_first > 0"
    rate: rate1
    then: {at_first: "at_first - 1"}
  - name: serve2
    when: "at_first < jobs"
    rate: rate2
    then: {at_first: "at_first + 1"}
"""


def close(a, b, what):
    ok = abs(a - b) <= AGREE * max(abs(b), 1e-300) or abs(a - b) <= 1e-15
    check(ok, f"{what}: longrun {a!r}, closed form {b!r}")


def mmck(lam, mu, c, k):
    a = lam / mu
    w = [a**n / math.factorial(n) if n < c else a**n / (math.factorial(c) * c ** (n - c))
         for n in range(k + 1)]
    s = sum(w)
    return np.array([x / s for x in w])


def quantile(p, level):
    """Smallest n with P(N <= n) >= level, compared on the tail side."""
    tail = np.cumsum(p[::-1])[::-1]
    for n in range(len(p)):
        above = tail[n + 1] if n + 1 < len(p) else 0.0
        if above <= 1.0 - level + 1e-15:
            return n
    return len(p) - 1


def erlang_b(c, a):
    b = 1.0
    for k in range(1, c + 1):
        b = a * b / (k + a * b)
    return b


def prepare(out, name, text, ranks):
    model = os.path.join(out, name + ".yaml")
    with open(model, "w") as f:
        f.write(text)
    chain = os.path.join(out, name + ".h5")
    result = os.path.join(out, name + "-result.h5")
    done = run(["generate", model, "-o", chain, "--quiet"])
    check(done.returncode == 0, f"generate {name}: exit {done.returncode}: {done.stderr}")
    done = run(["solve", chain, "-o", result, "--tol", "1e-12", "--quiet"], ranks=ranks)
    check(done.returncode == 0, f"solve {name}: exit {done.returncode}: {done.stderr}")
    return result


def summarize(args, ranks):
    done = run(["summarize", *args], ranks=ranks)
    check(done.returncode == 0, f"summarize {args}: exit {done.returncode}: {done.stderr}")
    return done


def measure(report, name):
    for m in report["measures"]:
        if m["name"] == name:
            return m
    check(False, f"no measure {name} in the JSON report")
    return None


def event(report, name):
    for e in report["event_rates"]["events"]:
        if e["name"] == name:
            return e["rate"]
    check(False, f"no event rate {name} in the JSON report")
    return math.nan


def check_mmck(out, ranks):
    lam, mu, c, k = 2.5, 1.0, 3, 12
    p = mmck(lam, mu, c, k)
    result = prepare(out, "mmck", MMCK, ranks)
    json_path = os.path.join(out, "mmck-summary.json")
    csv_path = os.path.join(out, "mmck-summary.csv")
    done = summarize([result, "--measure", "waiting=max(n-servers,0)", "--given", "n>=servers",
                      "--tail", "full=n==capacity", "--tail", "n>=5", "--quantile", "n:0.9999",
                      "--rate", "lost_fraction=lose/(lose+admit)", "--json", json_path,
                      "--csv", csv_path, "--plot", os.path.join(out, "plots", "mmck"),
                      "--report", os.path.join(out, "mmck-report.html")], ranks)
    if done.returncode != 0:
        return
    check("Caution" in done.stdout, "the terminal output carries the safety caution")
    for stem in ("n", "waiting", "residuals"):
        for ext, magic in ((".png", b"\x89PNG"), (".svg", b"<?xml")):
            path = os.path.join(out, "plots", f"mmck-{stem}{ext}")
            check(os.path.exists(path) and open(path, "rb").read(5).startswith(magic[:4]),
                  f"plot {path} written")
    with open(json_path) as f:
        report = json.load(f)
    n = measure(report, "n")
    if n:
        values = [row[0] for row in n["distribution"]]
        tails = [row[2] for row in n["distribution"]]
        check(values == list(range(k + 1)), f"values of n: {values}")
        exact_tail = np.cumsum(p[::-1])[::-1]
        for i, t in enumerate(tails):
            close(t, exact_tail[i], f"P(n >= {i})")
        mean = float(np.sum(np.arange(k + 1) * p))
        close(n["mean"], mean, "mean of n")
        close(n["std"], math.sqrt(float(np.sum((np.arange(k + 1) - mean) ** 2 * p))), "std of n")
        for level in ("0.5", "0.9", "0.99", "0.999", "0.9999"):
            check(n["quantiles"].get(level) == quantile(p, float(level)),
                  f"quantile {level} of n: {n['quantiles'].get(level)} vs {quantile(p, float(level))}")
        busy = p[c:].sum()
        given = n["given"][0]
        close(given["probability"], busy, "P(n >= servers)")
        close(given["mean"], float(np.sum(np.arange(c, k + 1) * p[c:])) / busy, "E[n | n >= c]")
    w = measure(report, "waiting")
    if w:
        lq = float(sum((i - c) * p[i] for i in range(c, k + 1)))
        close(w["mean"], lq, "Lq = mean of --measure waiting")
    probs = {x["name"]: x["probability"] for x in report["probabilities"]}
    close(probs.get("full", math.nan), p[k], "P(full)")
    close(probs.get("n>=5", math.nan), p[5:].sum(), "P(n>=5)")
    close(event(report, "lose"), lam * p[k], "loss rate")
    close(event(report, "depart"), lam * (1 - p[k]), "throughput")
    close(event(report, "lost_fraction"), p[k], "fraction of arrivals lost")
    check(report["event_rates"]["unit"] == "per unit time", "ctmc rates are per unit time")

    with open(csv_path) as f:
        rows = list(csv.DictReader(f))
    mean_rows = [r for r in rows if r["kind"] == "measure" and r["name"] == "n"
                 and r["statistic"] == "mean"]
    check(len(mean_rows) == 1 and abs(float(mean_rows[0]["value"]) - n["mean"]) < 1e-12,
          "CSV has the mean of n")

    with h5py.File(result, "r") as f:
        check("summary/measures/n" in f, "result file has /summary/measures/n")
        if "summary/measures/n" in f:
            g = f["summary/measures/n"]
            close(float(g.attrs["mean"]), n["mean"], "/summary/measures/n mean attribute")
            close(float(np.asarray(g["tail"])[k]), p[k], "/summary/measures/n/tail[K]")
        check("summary/events/lose" in f, "result file has /summary/events/lose")
        if "summary/events/lose" in f:
            close(float(f["summary/events/lose"].attrs["rate"]), lam * p[k],
                  "/summary/events/lose rate attribute")

    # --no-store leaves the result file byte for byte as it was.
    before = hashlib.sha256(open(result, "rb").read()).hexdigest()
    summarize([result, "--no-store", "--measure", "other=2*n", "-q"], ranks)
    after = hashlib.sha256(open(result, "rb").read()).hexdigest()
    check(before == after, "--no-store modified the result file")

    # One clear line and exit 1 for an unknown name, on every rank count.
    done = run(["summarize", result, "--measure", "load=n+queue"], ranks=ranks)
    check(done.returncode == 1, f"unknown name: exit {done.returncode}, expected 1")
    # mpirun adds its own box of text about the exit status; ours is one line.
    lines = [line for line in done.stderr.splitlines() if line.startswith("longrun")]
    check(len(lines) == 1 and "queue" in done.stderr and "--measure" in done.stderr,
          f"unknown name: one line naming the option and the name, got {done.stderr!r}")
    # A result whose chain is gone: exit 2, naming the file.
    os.rename(os.path.join(out, "mmck.h5"), os.path.join(out, "moved.h5"))
    done = run(["summarize", result, "--no-store"], ranks=ranks)
    check(done.returncode == 2 and "mmck.h5" in done.stderr and "--chain" in done.stderr,
          f"missing chain: exit {done.returncode}, {done.stderr!r}")
    done = run(["summarize", result, "--no-store", "--chain", os.path.join(out, "moved.h5")],
               ranks=ranks)
    check(done.returncode == 0, f"--chain moved.h5: exit {done.returncode}: {done.stderr}")


def check_erlang(out, ranks):
    lam, c, a = 3.0, 5, 3.0
    result = prepare(out, "erlang", ERLANG, ranks)
    done = summarize([result, "--json", "-", "--tail", "all_busy=busy==lines"], ranks)
    if done.returncode != 0:
        return
    report = json.loads(done.stdout)
    b = erlang_b(c, a)
    close(event(report, "blocked"), lam * b, "Erlang B loss rate lambda B(5, 3)")
    close(report["probabilities"][0]["probability"], b, "P(all lines busy) = B(5, 3)")
    close(event(report, "hang_up"), lam * (1 - b), "carried traffic")


def check_cyclic(out, ranks):
    n_jobs, mu1, mu2 = 6, 2.0, 3.0
    result = prepare(out, "cyclic", CYCLIC, ranks)
    done = summarize([result, "--json", "-"], ranks)
    if done.returncode != 0:
        return
    report = json.loads(done.stdout)

    def g(n):
        return sum((1 / mu1) ** k * (1 / mu2) ** (n - k) for k in range(n + 1))

    close(event(report, "serve1"), g(n_jobs - 1) / g(n_jobs), "Gordon-Newell throughput")
    close(event(report, "serve2"), g(n_jobs - 1) / g(n_jobs), "the same flow at station 2")


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


def check_queue_tails(out, ranks):
    k, rho = 30, 0.5
    p = [(1 - rho) * rho**n / (1 - rho ** (k + 1)) for n in range(k + 1)]
    far_exact, near_exact = sum(p[28:]), sum(p[6:])
    model, chain = os.path.join(out, "mm1k.yaml"), os.path.join(out, "mm1k.h5")
    with open(model, "w") as f:
        f.write(MM1K)
    done = run(["generate", model, "-o", chain, "--quiet"])
    check(done.returncode == 0, f"generate mm1k: exit {done.returncode}: {done.stderr}")
    tails = ["--tail", "far=n>=28", "--tail", "near=n>=6"]
    for tol, far_resolved in (("1e-6", False), ("1e-10", True)):
        result = os.path.join(out, f"mm1k-{tol}.h5")
        done = run(["solve", chain, "-o", result, "--method", "power", "--tol", tol, "--quiet"],
                   ranks=ranks)
        if not check(done.returncode == 0, f"solve mm1k --tol {tol}: exit {done.returncode}"):
            continue
        json_path, csv_path = result + ".json", result + ".csv"
        done = summarize([result, *tails, "--json", json_path, "--csv", csv_path], ranks)
        if done.returncode != 0:
            continue
        with open(json_path) as f:
            report = json.load(f)
        estimate = report["certificate"]["error_estimate"]
        bound = report["probability_error_bound"]
        check(0 < estimate <= float(tol) and bound == estimate / 2,
              f"--tol {tol}: error_estimate {estimate}, probability_error_bound {bound}")
        check(f"estimated error ||pi_hat - pi||_1 = {estimate:.2e}" in done.stdout,
              f"--tol {tol}: the certificate line shows the estimate: {done.stdout[:600]}")
        probs = {x["name"]: x for x in report["probabilities"]}
        far, near = probs.get("far", {}), probs.get("near", {})
        check(far.get("resolved") is far_resolved and far.get("error_bound") == bound,
              f"--tol {tol}: P(far) {far}")
        check(near.get("resolved") is True and abs(near["probability"] - near_exact) <= bound,
              f"--tol {tol}: P(near) {near}, closed form {near_exact}")
        marked = ("P(far) = P(n>=28) = " in done.stdout
                  and "(unresolved: --tol 1e-10)" in done.stdout)
        if far_resolved:
            check(abs(far["probability"] - far_exact) <= bound and far["tol_to_resolve"] is None,
                  f"--tol {tol}: P(far) {far}, closed form {far_exact}, bound {bound}")
            check(not marked, f"--tol {tol}: P(far) still marked unresolved")
        else:
            check(far.get("tol_to_resolve") == 1e-10 and marked,
                  f"--tol {tol}: P(far) {far} not marked with --tol 1e-10: {done.stdout}")
        with open(csv_path) as f:
            rows = {r["name"]: r for r in csv.DictReader(f) if r["kind"] == "probability"}
        check(rows.get("far", {}).get("resolved") == ("true" if far_resolved else "false")
              and float(rows["far"]["error_bound"]) == bound, f"CSV row of far: {rows.get('far')}")
        with h5py.File(result, "r") as f:
            stored = f["summary"].attrs.get("probability_error_bound")
            check(stored is not None and float(stored) == bound,
                  f"/summary probability_error_bound {stored}, JSON {bound}")
            mean_bound = f["summary/measures/n"].attrs.get("mean_error_bound")
            check(mean_bound is not None and float(mean_bound) == k * bound,
                  f"/summary/measures/n mean_error_bound {mean_bound}, expected {k * bound}")


def main():
    out = sys.argv[1]
    ranks = int(sys.argv[2]) if len(sys.argv) > 2 else None
    os.makedirs(os.path.join(out, "plots"), exist_ok=True)
    check_mmck(out, ranks)
    check_erlang(out, ranks)
    check_cyclic(out, ranks)
    check_queue_tails(out, ranks)
    return finish(f"summarize ({ranks or 1} rank(s))")


if __name__ == "__main__":
    sys.exit(main())
