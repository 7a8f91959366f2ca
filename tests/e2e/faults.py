#!/usr/bin/python3
"""Faults during a long `solve`, made for real: a killed job, a stop signal, a
full disk.

  faults.py setup DIR FAMILY      a tandem line big enough to run for seconds under
                                  power iteration, its SciPy solution and an
                                  uninterrupted longrun solution (the references)
  faults.py sigkill DIR           2-rank power solve that cannot finish, with
                                  --checkpoint-every 0.2; once the checkpoint exists,
                                  SIGKILL every process of the job; --resume (with the
                                  real tolerance) reaches the references
  faults.py sigterm DIR           the same with SIGTERM to each rank (as a batch
                                  scheduler signals every task): exit 7, one line
                                  naming the checkpoint, --resume reaches the
                                  references; without --checkpoint: exit 7, nothing
  faults.py diskfull DIR          the result write hits a full filesystem (a 32 KiB
                                  tmpfs, 1 and 2 ranks; where mounting is not allowed,
                                  a file-size limit on 1 rank instead, and the test
                                  then reports itself skipped): exit 6, one line
                                  naming the file and the system's reason, no file
                                  under the final name, no temporary left, input
                                  untouched
  faults.py metadata DIR          the same when the disk fills only during HDF5's
                                  final metadata flush: a tmpfs that holds every
                                  byte of the result's data but not the whole file
                                  (1 and 2 ranks; skipped where mounting is not
                                  allowed). Before longrun reserved the flush's
                                  space, this hung 2 ranks and crashed 1 at exit

The references are outside longrun (SciPy's sparse LU, scipy_reference.py) and a
longrun run that was never interrupted. No sleeps synchronise anything: the test
polls for the checkpoint file, which longrun writes under a temporary name and
renames, so that its appearance means it is complete.
"""

import errno
import hashlib
import os
import resource
import signal
import subprocess
import sys
import time

import h5py
import numpy as np

import e2e_common as e2e
from e2e_common import check

# Arrival 1, services 1.25 and 1.2 on 80 x 80 states: a slowly mixing line (both
# stations heavily loaded), so that power iteration takes thousands of products
# (about 6 s on 2 ranks here) and the kill lands mid-run. Invented parameters.
TANDEM = ["tandem", "--n1", "80", "--n2", "80", "--arrival", "1", "--service1", "1.25",
          "--service2", "1.2"]
TOL = "1e-11"
# The run that gets interrupted must not be able to finish first, however fast the
# machine: it asks for a residual of 1e-30, far below the rounding floor of double
# precision (about 1e-17 on this chain), and switches off both ways in which power
# iteration gives up early, the iteration limit and the stall watch (whose window is
# made as long as the limit). 10^9 products take hours, so only the signal ends it;
# mpirun's --timeout is a safety net should this script itself be killed. --resume
# then asks for TOL with the default settings: a checkpoint holds the iterate, not
# the tolerance, and a resumed run may change both (only the chain must match).
UNREACHABLE_TOL = "1e-30"
ENDLESS = ["--", "-power_max_it", "1000000000", "-power_window", "1000000000"]
SAFETY_TIMEOUT = "110"
# ctest counts this exit status as "skipped" (SKIP_RETURN_CODE in CMakeLists.txt):
# a case that cannot run here must not pass as a weaker one.
SKIPPED = 77

# Two answers certified to an estimated error of 1e-11 each are within 2e-11 of
# each other in the 1-norm; 1e-10 is the agreement asked for, with room for an
# estimate that understates by the 2x the tests allow.
AGREE = 1e-10


def mpirun(ranks):
    return ["/usr/bin/mpirun", "-n", str(ranks), "--oversubscribe"]


def job_processes(session):
    """Every process of the session started for the job: mpirun and its ranks
    (Open MPI gives each rank its own process group, so killpg alone misses them)."""
    found = []
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            with open(f"/proc/{entry}/stat") as f:
                fields = f.read().rsplit(")", 1)[1].split()
        except OSError:
            continue
        if int(fields[3]) == session:  # field 6 of stat: the session id
            found.append(int(entry))
    return found


def rank_processes(mpirun_pid):
    with open(f"/proc/{mpirun_pid}/task/{mpirun_pid}/children") as f:
        return [int(p) for p in f.read().split()]


def start(args, ranks=2, unbuffered=False):
    """Starts a job in a session of its own (so that every process of it can be
    found); `unbuffered`: stderr as raw bytes, read line by line with nothing
    held back from communicate()."""
    command = mpirun(ranks) + ["--timeout", SAFETY_TIMEOUT, e2e.longrun_binary(), *args]
    print("$ " + " ".join(command), flush=True)
    if unbuffered:
        return subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                                bufsize=0, start_new_session=True)
    return subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            start_new_session=True)


def kill_job(job):
    """SIGKILL to every process of the job's session; returns how many got it."""
    victims = job_processes(job.pid)
    for pid in victims:
        try:
            os.kill(pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
    return len(victims)


def finished(job, timeout=50):
    """(stdout, stderr) of a job that was told to end; one that does not end in
    `timeout` seconds is killed (an endless run must never outlive the test)."""
    try:
        return job.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        kill_job(job)
        out, err = job.communicate()
        check(False, f"the job did not end within {timeout} s of its signal (killed)")
        return out, err


def wait_for_file(path, process, limit=50.0):
    """Polls until `path` exists; False when the job ended first or `limit` passed."""
    deadline = time.monotonic() + limit
    while time.monotonic() < deadline:
        if os.path.exists(path):
            return True
        if process.poll() is not None:
            return False
        time.sleep(0.02)  # polling interval, not synchronisation
    return False


def compare_with_references(folder, result):
    pi, cert = e2e.read_result(result)
    scipy_pi = np.load(os.path.join(folder, "scipy.npy"))
    plain, _ = e2e.read_result(os.path.join(folder, "uninterrupted.h5"))
    check(bool(cert.get("converged")), f"{result}: certificate not converged")
    check(float(cert["residual"]) <= float(TOL), f"{result}: residual {cert['residual']} > {TOL}")
    d_plain = float(np.abs(pi - plain).sum())
    d_scipy = float(np.abs(pi - scipy_pi).sum())
    print(f"  ||resumed - uninterrupted||_1 = {d_plain:.3e}, ||resumed - scipy||_1 = {d_scipy:.3e}")
    check(d_plain <= AGREE, f"{result}: differs from the uninterrupted run by {d_plain:.3e}")
    check(d_scipy <= AGREE, f"{result}: differs from SciPy's solution by {d_scipy:.3e}")


def solve_args(folder, name, extra=(), tol=TOL):
    return ["solve", os.path.join(folder, "chain.h5"), "-o", os.path.join(folder, name),
            "--method", "power", "--tol", tol, *extra]


def endless_args(folder, name, extra=()):
    """A power solve that only a signal ends (see UNREACHABLE_TOL)."""
    return solve_args(folder, name, [*extra, *ENDLESS], tol=UNREACHABLE_TOL)


def setup(folder, family):
    chain = os.path.join(folder, "chain.h5")
    done = subprocess.run([family, *TANDEM, "-o", chain], capture_output=True, text=True)
    if not check(done.returncode == 0, f"generate failed: {done.stderr}"):
        return
    ref = subprocess.run(
        ["/usr/bin/python3", os.path.join(e2e.source_dir(), "benchmarks", "scipy_reference.py"),
         chain, "--method", "direct", "--out", os.path.join(folder, "scipy.npy"),
         "--max-residual", "1e-13"], capture_output=True, text=True)
    check(ref.returncode == 0, f"scipy_reference failed: {ref.stderr}")
    # The uninterrupted run uses another method (linear), so that a fault in the
    # power iteration's resume cannot hide in both answers.
    plain = e2e.run(["solve", chain, "-o", os.path.join(folder, "uninterrupted.h5"), "--method",
                     "linear", "--tol", TOL, "-q"], ranks=2)
    check(plain.returncode == 0, f"uninterrupted solve failed: {plain.stderr}")


def resume_and_compare(folder, checkpoint, name):
    done = e2e.run(solve_args(folder, name, ["--checkpoint", checkpoint, "--resume", checkpoint,
                                             "-q"]), ranks=2)
    if check(done.returncode == 0, f"resume failed ({done.returncode}): {done.stderr}"):
        check(f"resumed from {checkpoint}" in done.stdout,
              f"the report does not say it resumed from {checkpoint}: {done.stdout}")
        compare_with_references(folder, os.path.join(folder, name))


def sigkill(folder):
    checkpoint = os.path.join(folder, "killed.ck.h5")
    for stale in (checkpoint, os.path.join(folder, "killed.h5")):
        if os.path.exists(stale):
            os.remove(stale)
    job = start(endless_args(folder, "killed.h5", ["--checkpoint", checkpoint,
                                                   "--checkpoint-every", "0.2", "-q"]))
    try:
        appeared = wait_for_file(checkpoint, job)
    finally:
        victims = kill_job(job)
        job.communicate()
    if not check(appeared, f"no checkpoint appeared; the job ended with {job.returncode}"):
        return
    print(f"  killed {victims} processes with SIGKILL; exit {job.returncode}")
    check(job.returncode == -signal.SIGKILL, f"mpirun ended with {job.returncode}, not SIGKILL")
    check(not os.path.exists(os.path.join(folder, "killed.h5")), "a result appeared anyway")
    resume_and_compare(folder, checkpoint, "killed_resumed.h5")


def stop_with_sigterm(folder, name, extra, wait_for):
    """Starts a 2-rank solve that cannot finish, waits for `wait_for` (a file)
    and sends SIGTERM to each rank; returns (exit code, stderr)."""
    job = start(endless_args(folder, name, extra))
    try:
        appeared = wait_for_file(wait_for, job)
        if appeared:
            for pid in rank_processes(job.pid):
                os.kill(pid, signal.SIGTERM)
    except BaseException:
        kill_job(job)
        raise
    if not appeared:
        kill_job(job)
        _, err = job.communicate()
        check(False, f"{wait_for} did not appear; the job ended with {job.returncode}: {err}")
        return None, ""
    _, err = finished(job)
    print(f"  exit {job.returncode}\n  stderr: {err.strip()}")
    return job.returncode, err


def sigterm(folder):
    checkpoint = os.path.join(folder, "stopped.ck.h5")
    for stale in (checkpoint, os.path.join(folder, "stopped.h5")):
        if os.path.exists(stale):
            os.remove(stale)
    code, err = stop_with_sigterm(
        folder, "stopped.h5", ["--checkpoint", checkpoint, "--checkpoint-every", "0.2", "-q"],
        checkpoint)
    if code is None:
        return
    check(code == 7, f"SIGTERM'd solve exited {code}, not 7")
    lines = [l for l in err.splitlines() if l.startswith("longrun:")]
    check(len(lines) == 1, f"expected one longrun line, got {lines}")
    line = lines[0] if lines else ""
    check("stopped by SIGTERM at iteration" in line, f"line does not say SIGTERM: {line}")
    check(f"checkpoint written to {checkpoint}" in line, f"line does not name the checkpoint: {line}")
    check(f"--resume {checkpoint}" in line, f"line does not say how to resume: {line}")
    check(not os.path.exists(os.path.join(folder, "stopped.h5")), "a result appeared anyway")
    resume_and_compare(folder, checkpoint, "stopped_resumed.h5")

    # Without --checkpoint: nothing may be written. Stopped while iterating, the
    # line says no checkpoint was written; stopped earlier (still reading), that
    # nothing was; both end with exit 7. The signal goes once rank 0 has said how
    # power iteration will run (its last note before the first product): from
    # then on the run is iterating and cannot end by itself.
    before = set(os.listdir(folder))
    job = start(endless_args(folder, "plain.h5"), unbuffered=True)
    seen = []
    try:
        while True:
            line = job.stderr.readline()
            if not line:
                break
            seen.append(line)
            if line.lstrip().startswith(b"power:"):
                break
        started = bool(seen) and seen[-1].lstrip().startswith(b"power:")
        ranks = rank_processes(job.pid) if job.poll() is None else []
        for pid in ranks:
            try:
                os.kill(pid, signal.SIGTERM)
            except ProcessLookupError:
                pass
    except BaseException:
        kill_job(job)
        raise
    _, rest = finished(job)
    err = b"".join(seen).decode() + rest.decode()
    print(f"  exit {job.returncode}\n  stderr: {err.strip()}")
    check(started, "the run ended before power iteration began")
    check(job.returncode == 7, f"SIGTERM'd solve without --checkpoint exited {job.returncode}")
    lines = [l for l in err.splitlines() if l.startswith("longrun:")]
    check(len(lines) == 1 and "stopped by SIGTERM" in lines[0] and
          ("no checkpoint written" in lines[0] or "nothing written" in lines[0]),
          f"expected one line saying nothing was written, got {lines}")
    check(set(os.listdir(folder)) == before, f"files appeared: {set(os.listdir(folder)) - before}")


def checksum(path):
    with open(path, "rb") as f:
        return hashlib.sha256(f.read()).hexdigest()


def write_onto_full_disk(folder, full, ranks, preexec=None):
    """One solve whose result goes into the full folder `full`; returns the
    CompletedProcess. One rank is a plain start, as most users run it."""
    target = os.path.join(full, "result.h5")
    args = ["solve", os.path.join(folder, "chain.h5"), "-o", target, "--method", "linear",
            "--tol", TOL, "-q"]
    if ranks == 1:
        command = [e2e.longrun_binary(), *args]
        print("$ " + " ".join(command), flush=True)
        job = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                               start_new_session=True, preexec_fn=preexec)
    else:
        job = start(args, ranks)
    try:
        out, err = job.communicate(timeout=60)
    except subprocess.TimeoutExpired:
        # A rank that failed alone must not leave the others waiting in a
        # collective call: a hang is a failure, and the job must go before the
        # mount can.
        kill_job(job)
        out, err = job.communicate()
        check(False, f"{ranks} rank(s): the job hung after the failed write (killed after 60 s)")
    print(f"  exit {job.returncode}\n  stderr: {err.strip()}")
    return subprocess.CompletedProcess(args, job.returncode, out, err)


def check_clean_failure(done, full, ranks, reason):
    target = os.path.join(full, "result.h5")
    label = f"{ranks} rank(s)"
    check(done.returncode == 6, f"{label}: exit {done.returncode}, not 6 (output failed)")
    # mpirun adds its own banner about the non-zero exit; longrun's lines are ours.
    lines = [l for l in done.stderr.splitlines() if l.startswith("longrun:")]
    check(len(lines) == 1, f"{label}: expected one longrun line on stderr, got {lines}")
    line = lines[0] if lines else ""
    check(target in line, f"{label}: the line does not name {target}: {line}")
    check(reason in line, f"{label}: the line does not say '{reason}': {line}")
    check(not os.path.exists(target), f"{label}: a result file exists under the final name")
    left = os.listdir(full)
    check(left == [], f"{label}: left behind in the full folder: {left}")
    for leftover in left:
        os.remove(os.path.join(full, leftover))


def diskfull(folder):
    chain = os.path.join(folder, "chain.h5")
    before = checksum(chain)
    full = os.path.join(folder, "full")
    if os.path.ismount(full):
        subprocess.run(["umount", full], check=False)
    os.makedirs(full, exist_ok=True)
    for leftover in os.listdir(full):
        os.remove(os.path.join(full, leftover))
    # The result (a 6,400-entry distribution alone is 50 KiB) needs
    # more than 32 KiB; the checkpoint-free solve writes nothing else there.
    mounted = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=32k", "tmpfs", full],
                             capture_output=True, text=True).returncode == 0
    try:
        if mounted:
            # Both a plain start and 2 ranks: on 1 rank the failure must unwind
            # without leaving HDF5 a file to close at exit, on 2 ranks the rank
            # whose write failed must not leave the other waiting.
            print("  full disk: a 32 KiB tmpfs")
            for ranks in (1, 2):
                done = write_onto_full_disk(folder, full, ranks)
                check_clean_failure(done, full, ranks, os.strerror(errno.ENOSPC))
        else:
            # No mount here (a container without the right): a file-size limit makes
            # write() fail with EFBIG once a file passes 32 KiB. SIGXFSZ is ignored
            # so that the write fails instead of killing the process; mpirun would
            # reset that disposition, so this runs on one rank without it.
            print("  full disk: mount refused, RLIMIT_FSIZE of 32 KiB instead")

            def limit():
                signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
                resource.setrlimit(resource.RLIMIT_FSIZE, (32768, 32768))

            done = write_onto_full_disk(folder, full, 1, preexec=limit)
            check_clean_failure(done, full, 1, os.strerror(errno.EFBIG))
    finally:
        if mounted:
            subprocess.run(["umount", full], check=False)
    check(checksum(chain) == before, "the input chain file changed")
    return mounted


def fresh_mount_point(folder, name):
    point = os.path.join(folder, name)
    if os.path.ismount(point):
        subprocess.run(["umount", point], check=False)
    os.makedirs(point, exist_ok=True)
    for leftover in os.listdir(point):
        os.remove(os.path.join(point, leftover))
    return point


def data_pages(result, page):
    """(pages that hold dataset bytes, pages of the whole file) of a result file."""
    touched = set()

    def add(start, size):
        touched.update(range(start // page, (start + size - 1) // page + 1))

    def visit(_, item):
        if not isinstance(item, h5py.Dataset) or item.id.get_storage_size() == 0:
            return
        if item.chunks is None:
            add(item.id.get_offset(), item.id.get_storage_size())
            return
        # Results written from one rank are chunked (with checksums): every chunk
        # is its own run of bytes.
        for i in range(item.id.get_num_chunks()):
            info = item.id.get_chunk_info(i)
            add(info.byte_offset, info.size)

    with h5py.File(result, "r") as f:
        f.visititems(visit)
    return len(touched), -(-os.path.getsize(result) // page)


def metadata(folder):
    """The disk fills during the final metadata flush. HDF5 writes the datasets'
    bytes as they come and its own metadata (superblock, object headers, heaps,
    attributes) when the file is closed; a tmpfs allocates only the pages written.
    A tmpfs of as many pages as the datasets' bytes touch takes every dataset
    write and not the whole file: only the flush at close can find it full. The
    pages come from the same solve written to a roomy folder (its layout, read
    with h5py); the failure's message then shows that it came at the close."""
    chain = os.path.join(folder, "chain.h5")
    before = checksum(chain)
    roomy = os.path.join(folder, "roomy.h5")
    done = e2e.run(["solve", chain, "-o", roomy, "--method", "linear", "--tol", TOL, "-q"])
    if not check(done.returncode == 0, f"the reference solve failed: {done.stderr}"):
        return True
    page = os.sysconf("SC_PAGE_SIZE")
    pages, file_pages = data_pages(roomy, page)
    print(f"  datasets touch {pages} pages of {page} bytes, the whole file {file_pages}")
    if not check(pages < file_pages,
                 "every page of the result holds dataset bytes: this chain cannot make the "
                 "flush fail alone"):
        return True
    full = fresh_mount_point(folder, "metadata-full")
    mounted = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={pages * page}", "tmpfs",
                              full], capture_output=True, text=True).returncode == 0
    if not mounted:
        print("  SKIPPED: mounting a tmpfs is not allowed here; the metadata flush case needs "
              "one")
        return False
    try:
        for ranks in (1, 2):
            done = write_onto_full_disk(folder, full, ranks)
            check_clean_failure(done, full, ranks, os.strerror(errno.ENOSPC))
            # Every dataset fitted: it was the end of the write that found the disk full.
            check("cannot finish writing the file" in done.stderr,
                  f"{ranks} rank(s): the failure was not at the final flush: {done.stderr}")
    finally:
        subprocess.run(["umount", full], check=False)
    check(checksum(chain) == before, "the input chain file changed")
    return True


def main():
    mode, folder = sys.argv[1], sys.argv[2]
    if mode == "setup":
        setup(folder, sys.argv[3])
    elif mode == "sigkill":
        sigkill(folder)
    elif mode == "sigterm":
        sigterm(folder)
    elif mode in ("diskfull", "metadata"):
        ran_real_case = diskfull(folder) if mode == "diskfull" else metadata(folder)
        status = e2e.finish(f"faults {mode}")
        if status == 0 and not ran_real_case:
            print(f"faults {mode}: skipped (no tmpfs could be mounted)")
            return SKIPPED
        return status
    else:
        raise SystemExit(f"unknown mode {mode}")
    return e2e.finish(f"faults {mode}")


if __name__ == "__main__":
    sys.exit(main())
