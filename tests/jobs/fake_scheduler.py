#!/usr/bin/python3
"""Stands in for sbatch, qsub, scontrol and qstat (called through links of those
names) when the job scripts run without a scheduler: submissions are recorded, one
JSON line each, in $FAKE_SCHEDULER_LOG, and answered with a made-up job id; the
queries answer from FAKE_* variables set by the test."""

import json
import os
import sys

tool = os.path.basename(sys.argv[0])
args = sys.argv[1:]

if tool in ("sbatch", "qsub"):
    with open(os.environ["FAKE_SCHEDULER_LOG"], "a") as log:
        log.write(json.dumps({
            "tool": tool,
            "argv": args,
            "cwd": os.getcwd(),
            "env": {k: v for k, v in os.environ.items() if k.startswith("LONGRUN_")},
        }) + "\n")
    job = os.environ.get("FAKE_NEXT_JOB_ID", "9001")
    print(f"Submitted batch job {job}" if tool == "sbatch" else f"{job}.fakeserver")
elif tool == "scontrol":
    if args[:3] != ["-o", "show", "job"] or len(args) != 4:
        sys.exit(f"fake scontrol: unexpected arguments {args}")
    print(f"JobId={args[3]} JobName=longrun UserId=tester(0) JobState=RUNNING "
          f"TimeLimit={os.environ.get('FAKE_SLURM_TIMELIMIT', '00:10:00')} "
          f"Command={os.environ['FAKE_SLURM_COMMAND']} WorkDir={os.getcwd()}")
elif tool == "qstat":
    if args[:1] != ["-f"] or len(args) != 2:
        sys.exit(f"fake qstat: unexpected arguments {args}")
    print(f"Job Id: {args[1]}\n    Job_Name = longrun\n"
          f"    Resource_List.walltime = {os.environ.get('FAKE_PBS_WALLTIME', '00:10:00')}\n"
          f"    job_state = R")
else:
    sys.exit(f"fake scheduler: called as {tool}")
