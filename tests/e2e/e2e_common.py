"""Shared helpers of the end-to-end tests: run the `longrun` binary as a batch
script would, read its HDF5 files with h5py, and collect failures so that one
run reports every mismatch, not only the first."""

import os
import subprocess
import sys

import h5py
import numpy as np

failures = []


def check(condition, message):
    if not condition:
        failures.append(message)
    return bool(condition)


def finish(name):
    """Prints the verdict and returns the exit status for sys.exit."""
    if failures:
        for f in failures:
            print(f"FAIL: {f}", file=sys.stderr)
        print(f"{name}: {len(failures)} failure(s)", file=sys.stderr)
        return 1
    print(f"{name}: all checks passed")
    return 0


def env(name):
    value = os.environ.get(name)
    if not value:
        raise SystemExit(f"{name} is not set (run through ctest, which sets LONGRUN_TEST_ENV)")
    return value


def longrun_binary():
    return env("LONGRUN_BINARY")


def source_dir():
    return env("LONGRUN_SOURCE_DIR")


def run(args, ranks=None, timeout=300):
    """Runs longrun (under mpirun when ranks is given) and returns the
    CompletedProcess with text stdout/stderr."""
    command = [longrun_binary(), *args]
    if ranks is not None:
        command = ["/usr/bin/mpirun", "-n", str(ranks), "--oversubscribe", *command]
    print("$ " + " ".join(command), flush=True)
    done = subprocess.run(command, capture_output=True, text=True, timeout=timeout)
    print(f"  exit {done.returncode}", flush=True)
    return done


def text(value):
    if isinstance(value, (bytes, np.bytes_)):
        return value.decode("utf-8")
    if isinstance(value, np.ndarray) and value.shape == ():
        return text(value[()])
    return str(value)


def text_list(value):
    """A list-of-strings attribute; a one-element list may be stored as a scalar."""
    if isinstance(value, (str, bytes, np.bytes_)):
        return [text(value)]
    return [text(v) for v in value]


def read_chain(path):
    """(kind, offsets, targets, weights, {variable: values}) of a chain file."""
    with h5py.File(path, "r") as f:
        g = f["chain"]
        kind = text(g.attrs["kind"])
        offsets = g["offsets"][...].astype(np.int64)
        targets = g["targets"][...].astype(np.int64)
        weights = g["weights"][...].astype(np.float64)
        variables = {}
        if "states" in f:
            for name in text_list(f["states"].attrs["order"]):
                variables[name] = f["states"][name][...]
    return kind, offsets, targets, weights, variables


def read_result(path):
    """(distribution, certificate attributes as a dict) of a result file."""
    with h5py.File(path, "r") as f:
        check(text(f.attrs.get("schema", "")) == "longrun.result",
              f"{path}: schema attribute is not longrun.result")
        pi = f["distribution"][...]
        cert = {k: f["certificate"].attrs[k] for k in f["certificate"].attrs}
    return pi, cert
