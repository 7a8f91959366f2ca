#!/usr/bin/python3
"""The batch jobs of jobs/slurm/ and jobs/pbs/ run here without a scheduler: each job
script is copied to a spool folder and started from there, as Slurm and PBS do, with
the scheduler's variables set by hand, sbatch/qsub/scontrol/qstat replaced by
fake_scheduler.py (which records every submission) and the real mpirun starting the
ranks. The results are judged with h5py.

Usage: run_jobs.py slurm|pbs pipeline|resubmit|stop|sweep|options OUT_DIR

  pipeline  generate, solve (2 tasks), summarize; a failing solve delivers nothing
  resubmit  a solve interrupted once (exit 7) leaves no result, only its checkpoint,
            and submits the same job again; that job resumes and delivers; at the
            resubmission limit nothing more is submitted
  stop      the stop request (Slurm: SIGTERM to the batch shell as --signal=B:TERM
            sends it; PBS: the job's own timer before the wall time) reaches the ranks
            of a real solve that cannot finish by itself, through mpirun: longrun
            stops (exit 7), and the job resubmits itself
  sweep     a job array of 4 tasks, the gather job submitted by the first, then run
  options   every jobs/options/*.opts through the solve job with its own method

Check values:
  M/M/1/K, K = 10, service rate mu = 1: P(N = n) = (1 - rho) rho^n / (1 - rho^(K+1)),
  rho = lambda / mu  [Gross & Harris, Fundamentals of Queueing Theory, section "Finite
  queue M/M/1/K"].
"""

import glob
import json
import os
import shutil
import signal
import subprocess
import sys
import time

import h5py
import numpy as np

K = 10
ARRIVAL = 0.7
AGREE = 1e-8
TASKS = 2

SOURCE = os.environ["LONGRUN_SOURCE_DIR"]
JOBS = os.path.join(SOURCE, "jobs")
HERE = os.path.dirname(os.path.abspath(__file__))
# The M/M/1/K model shared with the sweep tests; its default arrival rate is ARRIVAL.
MODEL_FILE = os.path.join(HERE, os.pardir, "support", "models", "mm1k.yaml")
BINARY = os.environ["LONGRUN_BINARY"]

failures = []


def check(ok, what):
    if not ok:
        failures.append(what)
        print("FAIL:", what, flush=True)


def finish():
    if failures:
        print(f"{len(failures)} check(s) failed")
        sys.exit(1)
    print("all checks passed")


def mm1k(lam):
    rho = lam  # mu = 1
    n = np.arange(K + 1)
    return (1 - rho) * rho**n / (1 - rho ** (K + 1))


class Site:
    """A submission folder, a scratch folder, a spool folder and a fake scheduler."""

    def __init__(self, flavour, out):
        self.flavour = flavour
        shutil.rmtree(out, ignore_errors=True)
        self.submit = os.path.join(out, "submit")
        self.scratch = os.path.join(out, "scratch")
        self.spool = os.path.join(out, "spool")
        self.bin = os.path.join(out, "bin")
        for d in (self.submit, self.scratch, self.spool, self.bin):
            os.makedirs(d)
        for tool in ("sbatch", "qsub", "scontrol", "qstat"):
            os.symlink(os.path.join(HERE, "fake_scheduler.py"), os.path.join(self.bin, tool))
        self.log = os.path.join(out, "submissions.jsonl")
        self.nodefile = os.path.join(out, "nodefile")
        with open(self.nodefile, "w") as f:
            f.write("localhost\n" * TASKS)
        shutil.copyfile(MODEL_FILE, os.path.join(self.submit, "mm1k.yaml"))
        self.next_id = 100

    def script(self, job):
        ext = "sh" if self.flavour == "slurm" else "pbs"
        return os.path.join(JOBS, self.flavour, f"{job}.{ext}")

    def submissions(self):
        if not os.path.exists(self.log):
            return []
        with open(self.log) as f:
            return [json.loads(line) for line in f]

    def run(self, job, args=(), inputs=None, extra_env=None, array_index=None, start_only=False):
        """Runs one job as the scheduler would: a copy of the script, started in the
        submission folder with the scheduler's variables."""
        self.next_id += 1
        job_id = str(self.next_id)
        copy = os.path.join(self.spool, f"job{job_id}-script")
        shutil.copy(self.script(job), copy)
        env = {k: v for k, v in os.environ.items()
               if not k.startswith(("SLURM_", "PBS_", "LONGRUN_"))}
        env["PATH"] = self.bin + os.pathsep + env["PATH"]
        env["TMPDIR"] = self.scratch
        env["FAKE_SCHEDULER_LOG"] = self.log
        env["FAKE_NEXT_JOB_ID"] = str(self.next_id + 1000)
        env["LONGRUN_BINARY"] = BINARY
        # mpirun lingers twice this long after a rank's non-zero exit.
        env["LONGRUN_STOP_GRACE"] = "3"
        if self.flavour == "slurm":
            env.update(SLURM_JOB_ID=job_id, SLURM_SUBMIT_DIR=self.submit,
                       SLURM_NTASKS=str(TASKS), SLURM_JOB_NUM_NODES="1",
                       SLURM_JOB_NAME=f"longrun-{job}", SLURM_JOB_PARTITION="short",
                       FAKE_SLURM_COMMAND=self.script(job), FAKE_SLURM_TIMELIMIT="00:10:00")
            if array_index is not None:
                env.update(SLURM_ARRAY_TASK_ID=str(array_index), SLURM_ARRAY_JOB_ID="555",
                           SLURM_ARRAY_TASK_MIN="0", SLURM_JOB_ID=f"{555 + 1 + array_index}")
        else:
            pbs_id = f"{job_id}.fakeserver"
            if array_index is not None:
                pbs_id = f"555[{array_index}].fakeserver"
                env.update(PBS_ARRAY_INDEX=str(array_index), PBS_ARRAY_ID="555[].fakeserver")
            env.update(PBS_JOBID=pbs_id, PBS_O_WORKDIR=self.submit, PBS_NODEFILE=self.nodefile,
                       PBS_JOBNAME=f"longrun-{job}", PBS_QUEUE="workq",
                       LONGRUN_JOBS_DIR=JOBS)
        env.update(inputs or {})
        env.update(extra_env or {})
        command = ["/bin/bash", copy, *args]
        if start_only:
            return subprocess.Popen(command, cwd=self.submit, env=env, stdout=subprocess.PIPE,
                                    stderr=subprocess.STDOUT, text=True)
        started = time.monotonic()
        done = subprocess.run(command, cwd=self.submit, env=env, capture_output=True, text=True,
                              timeout=600)
        print(f"--- {self.flavour} {job} {' '.join(args)} exit {done.returncode} "
              f"({time.monotonic() - started:.1f} s)\n"
              f"{done.stdout}{done.stderr}", flush=True)
        return done

    def inputs(self, job, **named):
        """The job's inputs as Slurm arguments or as PBS variables (LONGRUN_EXTRA for
        the further options)."""
        order = {"generate": ["model", "chain"], "solve": ["chain", "result"],
                 "summarize": ["result"], "sweep": ["model", "prefix"],
                 "sweep-gather": ["prefix"]}[job]
        extra = named.pop("extra", [])
        if self.flavour == "slurm":
            return [named[k] for k in order] + extra, {}
        env = {f"LONGRUN_{k.upper()}": named[k] for k in order}
        if extra:
            env["LONGRUN_EXTRA"] = " ".join(extra)
        return [], env

    def job(self, job, extra_env=None, array_index=None, **named):
        args, env = self.inputs(job, **named)
        return self.run(job, args, env, extra_env, array_index)

    def work_folders(self):
        return glob.glob(os.path.join(self.scratch, "longrun-work-*")) + glob.glob(
            os.path.join(self.submit, "longrun-work-*"))

    def leftovers(self):
        """Temporary names that a delivery must not leave behind."""
        return [p for p in glob.glob(os.path.join(self.submit, "**", ".*.part-*"), recursive=True)]


def certified(path, lam=ARRIVAL):
    """The result is complete, certified, and is the M/M/1/K distribution."""
    with h5py.File(path, "r") as f:
        cert = f["certificate"].attrs
        residual, tolerance = float(cert["residual"]), float(cert["tolerance"])
        check(bool(cert["converged"]), f"{path}: certificate not converged")
        check(residual <= tolerance, f"{path}: residual {residual} above tolerance {tolerance}")
        pi = f["distribution"][...]
        order = f.attrs.get("chain_path")
        trace = cert["strategy_trace"]
        trace = trace.decode() if isinstance(trace, bytes) else str(trace)
        ranks = int(cert["ranks"])
    with h5py.File(order.decode() if isinstance(order, bytes) else order, "r") as c:
        queue = c["states/queue"][...] if "states/queue" in c else np.arange(len(pi))
    expected = mm1k(lam)[queue]
    err = float(np.max(np.abs(pi - expected)))
    check(err <= AGREE, f"{path}: max |pi - closed form| = {err:.3e} > {AGREE}")
    return trace, ranks


def pipeline(site):
    chain = "chains/mm1k.h5"
    done = site.job("generate", model="mm1k.yaml", chain=chain)
    check(done.returncode == 0, f"generate exit {done.returncode}")
    check(os.path.isfile(os.path.join(site.submit, chain)), "generate: chain not delivered")

    # A solve that cannot meet its tolerance (exit 4) delivers no result.
    done = site.job("solve", chain=chain, result="results/never.h5",
                    extra=["--tol", "1e-300", "--method", "linear"])
    check(done.returncode == 4, f"unreachable tolerance: exit {done.returncode}, expected 4")
    check(not os.path.exists(os.path.join(site.submit, "results/never.h5")),
          "a failed solve delivered a result")
    check(site.submissions() == [], "a failed solve submitted a job")

    done = site.job("solve", chain=chain, result="results/mm1k.h5", extra=["--tol", "1e-12"])
    check(done.returncode == 0, f"solve exit {done.returncode}")
    result = os.path.join(site.submit, "results/mm1k.h5")
    check(os.path.isfile(result), "solve: result not delivered")
    if os.path.isfile(result):
        _, ranks = certified(result)
        check(ranks == TASKS, f"solve ran on {ranks} ranks, the job has {TASKS} tasks")
    check(not os.path.exists(os.path.join(site.submit, "results/mm1k.checkpoint.h5")),
          "checkpoint left after a delivered result")

    done = site.job("summarize", result="results/mm1k.h5", extra=["--tail", "full=queue==10"])
    check(done.returncode == 0, f"summarize exit {done.returncode}")
    report = os.path.join(site.submit, "results/mm1k-report.html")
    summary = os.path.join(site.submit, "results/mm1k-summary.json")
    check(os.path.isfile(report) and os.path.getsize(report) > 0, "summarize: no report")
    check(os.path.isfile(summary), "summarize: no JSON")
    if os.path.isfile(result):
        with h5py.File(result, "r") as f:
            check("summary" in f, "summarize: /summary not in the delivered result")
            if "summary/probabilities/values" in f:
                p = float(f["summary/probabilities/values"][0])
                full = mm1k(ARRIVAL)[K]
                check(abs(p - full) <= AGREE, f"P(full) {p} against closed form {full}")
        certified(result)
    check(site.work_folders() == [], f"work folders left: {site.work_folders()}")
    check(site.leftovers() == [], f"temporary files left: {site.leftovers()}")


def interrupting_env(site, mode):
    return {"LONGRUN_BINARY": os.path.join(HERE, "interrupting_longrun.sh"),
            "LONGRUN_REAL": BINARY, "FAKE_MODE": mode,
            "FAKE_MARK": os.path.join(site.submit, f"..{mode}-mark")}


def check_resubmission(site, record, job_id, script_job, args_expected):
    check(record["cwd"] == site.submit, f"resubmitted from {record['cwd']}, not {site.submit}")
    argv = record["argv"]
    if site.flavour == "slurm":
        check(record["tool"] == "sbatch", f"resubmitted with {record['tool']}")
        for want in ("--export=ALL,LONGRUN_RESUBMITS=1", f"--dependency=afterany:{job_id}",
                     f"--ntasks={TASKS}", "--nodes=1", "--time=00:10:00",
                     "--job-name=longrun-solve", "--partition=short"):
            check(want in argv, f"sbatch lacks {want}: {argv}")
        i = argv.index(site.script(script_job)) if site.script(script_job) in argv else -1
        check(i >= 0, f"sbatch does not submit {site.script(script_job)}: {argv}")
        check(argv[i + 1:] == args_expected, f"sbatch arguments {argv[i + 1:]}, "
              f"expected {args_expected}")
    else:
        check(record["tool"] == "qsub", f"resubmitted with {record['tool']}")
        for want in (["-V"], ["-v", "LONGRUN_RESUBMITS=1"], ["-W", f"depend=afterany:{job_id}"],
                     ["-N", "longrun-solve"], ["-q", "workq"]):
            check(any(argv[i:i + len(want)] == want for i in range(len(argv))),
                  f"qsub lacks {' '.join(want)}: {argv}")
        check(argv[-1] == site.script(script_job), f"qsub does not submit the script: {argv}")


def replay(site, record, job, extra_env=None):
    """Runs a recorded resubmission as the scheduler would: its arguments and the
    variables that -V / --export=ALL carried, with its counter."""
    argv = record["argv"]
    carried = dict(record["env"])
    carried["LONGRUN_RESUBMITS"] = "1"
    carried.pop("LONGRUN_JOBS_DIR", None)
    script = site.script(job)
    args = argv[argv.index(script) + 1:] if site.flavour == "slurm" else []
    env = dict(carried)
    env.update(extra_env or {})
    return site.run(job, args, env)


def resubmit(site):
    chain = "mm1k.h5"
    done = site.job("generate", model="mm1k.yaml", chain=chain)
    check(done.returncode == 0, f"generate exit {done.returncode}")
    solve_args = {"chain": chain, "result": "out/r.h5", "extra": ["--tol", "1e-12"]}
    result = os.path.join(site.submit, "out/r.h5")
    checkpoint = os.path.join(site.submit, "out/r.checkpoint.h5")

    env = interrupting_env(site, "once")
    first_id = str(site.next_id + 1)
    done = site.job("solve", extra_env=env, **solve_args)
    check(done.returncode == 7, f"interrupted solve job: exit {done.returncode}, expected 7")
    check(not os.path.exists(result), "an interrupted solve delivered a result")
    check(os.path.isfile(checkpoint), "no checkpoint after the interruption")
    records = site.submissions()
    check(len(records) == 1, f"{len(records)} submissions after one interruption")
    if len(records) != 1:
        return
    job_id = first_id if site.flavour == "slurm" else f"{first_id}.fakeserver"
    args, _ = site.inputs("solve", **dict(solve_args))
    check_resubmission(site, records[0], job_id, "solve", args)

    # The resubmitted job, as the scheduler would start it: resumes and delivers.
    done = replay(site, records[0], "solve", env)
    check(done.returncode == 0, f"resubmitted solve: exit {done.returncode}")
    check(os.path.isfile(result), "the resubmitted solve delivered no result")
    if os.path.isfile(result):
        trace, _ = certified(result)
        check("resumed" in trace, f"the trace does not say it resumed: {trace}")
    check(not os.path.exists(checkpoint), "checkpoint left after the delivered result")
    check(len(site.submissions()) == 1, "the finished job submitted again")

    # At the limit: stop with 7 and submit nothing.
    os.remove(result)
    os.remove(env["FAKE_MARK"])
    limit = dict(env, LONGRUN_RESUBMITS="3", LONGRUN_MAX_RESUBMITS="3")
    done = site.job("solve", extra_env=limit, **solve_args)
    check(done.returncode == 7, f"at the limit: exit {done.returncode}, expected 7")
    check(len(site.submissions()) == 1, "resubmitted beyond LONGRUN_MAX_RESUBMITS")
    check("LONGRUN_MAX_RESUBMITS" in done.stdout + done.stderr, "no word about the limit")
    check(not os.path.exists(result), "a result appeared at the limit")
    check(site.work_folders() == [], f"work folders left: {site.work_folders()}")
    check(site.leftovers() == [], f"temporary files left: {site.leftovers()}")


# A solve that only a signal ends, however fast the machine: a residual of 1e-30
# lies below double precision's rounding floor, and power iteration's iteration
# limit and stall watch (whose window is made as long as the limit) are out of reach.
ENDLESS_SOLVE = ["--method", "power", "--tol", "1e-30", "--", "-power_max_it", "1000000000",
                 "-power_window", "1000000000"]


def stop(site):
    chain = "mm1k.h5"
    done = site.job("generate", model="mm1k.yaml", chain=chain)
    check(done.returncode == 0, f"generate exit {done.returncode}")
    env = {"LONGRUN_CHECKPOINT_EVERY": "0.2"}
    if site.flavour == "pbs":
        # The job's timer asks for the stop LONGRUN_STOP_BEFORE seconds before the wall
        # time, read from `qstat -f`: 308 s - 300 s = 8 s after the start.
        env.update(LONGRUN_STOP_BEFORE="300", FAKE_PBS_WALLTIME="00:05:08")
    args, inputs = site.inputs("solve", chain=chain, result="r.h5", extra=ENDLESS_SOLVE)
    checkpoint = os.path.join(site.submit, "r.checkpoint.h5")
    first_id = str(site.next_id + 1)
    process = site.run("solve", args, inputs, env, start_only=True)
    try:
        if site.flavour == "slurm":
            # Once the first checkpoint is there (written under a temporary name and
            # renamed), the solve is iterating: the stop request lands mid-solve.
            deadline = time.monotonic() + 120
            while (not os.path.exists(checkpoint) and process.poll() is None
                   and time.monotonic() < deadline):
                time.sleep(0.05)  # polling interval, not synchronisation
            check(os.path.exists(checkpoint), "no checkpoint before the stop request")
            process.send_signal(signal.SIGTERM)  # what --signal=B:TERM@T does
        output, _ = process.communicate(timeout=300)
    except BaseException:
        process.send_signal(signal.SIGTERM)  # the job passes it on: the solve stops
        process.communicate(timeout=60)
        raise
    print(f"--- {site.flavour} solve (stopped) exit {process.returncode}\n{output}", flush=True)
    check("longrun: stopped by SIGTERM" in output, "the stop request did not reach the ranks")
    check(process.returncode == 7, f"stopped solve job: exit {process.returncode}, expected 7")
    check(os.path.isfile(checkpoint), "no checkpoint after the stop")
    check(not os.path.exists(os.path.join(site.submit, "r.h5")), "a stopped solve delivered")
    records = site.submissions()
    check(len(records) == 1, f"{len(records)} submissions after the stop")
    if records:
        job_id = first_id if site.flavour == "slurm" else f"{first_id}.fakeserver"
        check_resubmission(site, records[0], job_id, "solve", args)
    check(site.work_folders() == [], f"work folders left: {site.work_folders()}")


def sweep(site):
    values = [0.5, 0.7, 0.9, 1.1]
    vary = ["--vary", "arrival=0.5,0.7,0.9,1.1", "--tail", "full=queue==10"]
    for i in range(len(values)):
        done = site.job("sweep", array_index=i, model="mm1k.yaml", prefix="sw/q", extra=vary)
        check(done.returncode == 0, f"sweep task {i}: exit {done.returncode}")
        check(os.path.isfile(os.path.join(site.submit, f"sw/q.point-{i}.json")),
              f"sweep task {i}: point not delivered")
    records = site.submissions()
    check(len(records) == 1, f"{len(records)} submissions by the array, expected 1 (gather)")
    if not records:
        return
    record = records[0]
    argv = record["argv"]
    prefix = os.path.join(site.submit, "sw/q")
    if site.flavour == "slurm":
        check("--dependency=afterok:555" in argv, f"gather dependency: {argv}")
        check(argv[-2:] == [site.script("sweep-gather"), prefix], f"gather command {argv}")
        args, env = [prefix], {}
    else:
        check(any(argv[i:i + 2] == ["-W", "depend=afterok:555[].fakeserver"]
                  for i in range(len(argv))), f"gather dependency: {argv}")
        check(argv[-1] == site.script("sweep-gather"), f"gather command {argv}")
        check(["-v", f"LONGRUN_PREFIX={prefix}"] == argv[argv.index("-v"):argv.index("-v") + 2],
              f"gather prefix: {argv}")
        args, env = [], {"LONGRUN_PREFIX": prefix}
    done = site.run("sweep-gather", args, env)
    check(done.returncode == 0, f"gather: exit {done.returncode}")
    table = os.path.join(site.submit, "sw/q.csv")
    check(os.path.isfile(table), "gather: no CSV delivered")
    if os.path.isfile(table):
        import csv
        with open(table, newline="") as f:
            rows = list(csv.reader(f))
        header, rows = rows[0], rows[1:]
        check(len(rows) == len(values), f"{len(rows)} rows, expected {len(values)}")
        col = header.index("P(full)") if "P(full)" in header else -1
        check(col >= 0, f"no P(full) column: {header}")
        for r, lam in zip(rows, values):
            if col >= 0:
                got, want = float(r[col]), mm1k(lam)[K]
                check(abs(got - want) <= AGREE, f"P(full) at {lam}: {got}, closed form {want}")
    check(site.work_folders() == [], f"work folders left: {site.work_folders()}")
    check(site.leftovers() == [], f"temporary files left: {site.leftovers()}")


def options(site):
    """Each options file of jobs/options/ named in LONGRUN_OPTIONS_FILE (a bare name is
    looked up there), with the method it is for."""
    done = site.job("generate", model="mm1k.yaml", chain="mm1k.h5")
    check(done.returncode == 0, f"generate exit {done.returncode}")
    files = sorted(glob.glob(os.path.join(JOBS, "options", "*.opts")))
    check(len(files) >= 5, f"only {len(files)} options files")
    for path in files:
        method = os.path.basename(path)[: -len(".opts")]
        result = f"r-{method}.h5"
        done = site.job("solve", extra_env={"LONGRUN_OPTIONS_FILE": method}, chain="mm1k.h5",
                        result=result, extra=["--method", method, "--tol", "1e-12"])
        check(done.returncode == 0, f"{method} with {path}: exit {done.returncode}")
        check(f"--options-file {path}" in done.stdout + done.stderr,
              f"{method}: the job did not pass {path}")
        if os.path.isfile(os.path.join(site.submit, result)):
            certified(os.path.join(site.submit, result))
        else:
            check(False, f"{method}: no result")


def main():
    flavour, scenario, out = sys.argv[1:4]
    site = Site(flavour, out)
    {"pipeline": pipeline, "resubmit": resubmit, "stop": stop, "sweep": sweep,
     "options": options}[scenario](site)
    finish()


if __name__ == "__main__":
    main()
