#!/usr/bin/python3
"""`--help` teaches: exit 0, nothing on stderr, and the text a batch-script
author needs.

Usage: help_text.py main|solve|convert

  main     exit codes 0, 1, 2, 3, 4 and 6 each with their meaning, both verbs,
           how PETSc options are passed, and an example command line; and two
           of the documented codes are held against the binary's behaviour
           (1: unknown option, 2: missing input file)
  solve    every method, checkpoints and resuming, the certificate, --tol, --json,
           examples for one rank and for mpirun
  convert  both directions with examples, --kind, --renormalize and --transposed
           (what it means: columns as source states)
"""

import re
import sys

from e2e_common import check, finish, run

EXPECTED = {
    "main": [
        r"Exit codes:",
        r"\b0 done\b",
        r"\b1 usage error\b",
        r"\b2 bad input\b",
        r"\b3 no unique stationary distribution\b",
        r"\b4 no certified answer\b",
        r"\b6 the result could not be written\b",
        r"^\s*convert\b",
        r"^\s*solve\b",
        r"mpirun",
        r"^\s*longrun solve \S+\.h5 -o \S+\.h5",
        r" -- -linear_",
    ],
    "solve": [
        r"\bauto\b",
        r"\blinear\b.*GMRES",
        r"\beigen\b.*Krylov-Schur",
        r"\baggregation\b.*aggregation-disaggregation",
        r"\bdirect\b.*MUMPS",
        r"\bgth\b",
        r"--checkpoint\b",
        r"--resume\b",
        r"--method",
        r"--tol\b",
        r"certificate",
        r"--json",
        r"^\s*longrun solve \S+\.h5 -o \S+\.h5",
        r"^\s*mpirun -n \d+ longrun solve ",
    ],
    "convert": [
        r"^\s*longrun convert \S+\.mtx \S+\.h5 --kind (ctmc|dtmc)",
        r"^\s*longrun convert \S+\.h5 \S+\.mtx",
        r"--kind",
        r"--renormalize",
        r"--transposed\b.*column j lists the\s+transitions out of state j",
        r"Matrix Market",
    ],
}


def main(argv):
    if len(argv) != 2 or argv[1] not in EXPECTED:
        raise SystemExit(__doc__)
    which = argv[1]
    args = ["--help"] if which == "main" else [which, "--help"]
    done = run(args)
    check(done.returncode == 0, f"longrun {' '.join(args)}: exit {done.returncode}")
    check(done.stderr == "", f"stderr is not empty: {done.stderr!r}")
    for pattern in EXPECTED[which]:
        check(re.search(pattern, done.stdout, re.MULTILINE) is not None,
              f"longrun {' '.join(args)} does not say /{pattern}/")
    if which == "main":
        # The documented codes are the real ones.
        usage = run(["solve", "--no-such-option", "x.h5"])
        check(usage.returncode == 1, f"unknown option: exit {usage.returncode}, documented 1")
        missing = run(["solve", "/nonexistent/e2e/absent.h5"])
        check(missing.returncode == 2, f"missing input: exit {missing.returncode}, documented 2")
    return finish(f"help {which}")


if __name__ == "__main__":
    sys.exit(main(sys.argv))
