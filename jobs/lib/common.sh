# shellcheck shell=bash
# The body of every batch job in jobs/slurm/ and jobs/pbs/. Those scripts hold only
# their scheduler's directives, find this file and call `longrun_job FLAVOUR JOB ARGS`;
# everything else, including the few places where the schedulers differ, is here.
#
# Settings (environment variables; sbatch exports the submitting shell's
# environment by default, qsub needs -V or -v NAME=VALUE):
#   LONGRUN_BINARY           the longrun program (default: longrun on PATH)
#   LONGRUN_MPIRUN           the MPI launcher, words split on blanks (default: mpirun);
#                            `-n TASKS` is appended
#   LONGRUN_OPTIONS_FILE     a PETSc options file, or the name of one in jobs/options/
#                            (e.g. linear), passed as `longrun --options-file`
#   LONGRUN_SCRATCH          a scratch folder that every node of the job sees (default:
#                            TMPDIR when the job has one node, else the submission folder)
#   LONGRUN_CHECKPOINT_DIR   where solve keeps its checkpoint between resubmissions
#                            (default: the result's folder)
#   LONGRUN_CHECKPOINT_EVERY seconds between checkpoints (default 600)
#   LONGRUN_MAX_RESUBMITS    how many times solve resubmits itself (default 10)
#   LONGRUN_STOP_BEFORE      PBS: seconds before the wall time at which solve is asked to
#                            stop (default 300; Slurm uses --signal in the directives)
#   LONGRUN_STOP_SIGNAL      the signal passed on to the launcher (default TERM)
#   LONGRUN_STOP_GRACE       seconds mpirun lets the ranks write their checkpoint after
#                            SIGTERM before it kills them (default 60)
#   LONGRUN_KEEP_WORK=1      keep the scratch work folder
# Inputs when a job gets no arguments (qsub passes none): LONGRUN_MODEL, LONGRUN_CHAIN,
# LONGRUN_RESULT, LONGRUN_PREFIX, and LONGRUN_EXTRA (further longrun options, split on
# blanks).

# --- small helpers ------------------------------------------------------------

lr_say() { printf 'longrun job: %s\n' "$*" >&2; }
lr_die() {
  lr_say "error: $*"
  exit 1
}

# Relative paths are meant from the folder the job was submitted from.
lr_absolute() {
  case $1 in
    /*) printf '%s\n' "$1" ;;
    *) printf '%s\n' "$lr_submit_dir/$1" ;;
  esac
}

# Copies FILE to DEST under a temporary name in DEST's folder, then renames it, so
# that DEST never exists half written.
lr_deliver() {
  local file=$1 dest=$2
  local part
  part="$(dirname "$dest")/.$(basename "$dest").part-$lr_job_tag"
  mkdir -p "$(dirname "$dest")"
  if ! cp "$file" "$part"; then
    rm -f "$part"
    lr_say "error: could not copy $file to $part"
    return 6
  fi
  if ! mv -f "$part" "$dest"; then
    rm -f "$part"
    lr_say "error: could not rename $part to $dest"
    return 6
  fi
  lr_say "delivered $dest"
}

# --- what differs between the schedulers --------------------------------------

lr_read_environment() {
  case $lr_flavour in
    slurm)
      lr_job_id=${SLURM_JOB_ID:?not inside a Slurm job (SLURM_JOB_ID unset)}
      lr_submit_dir=${SLURM_SUBMIT_DIR:-$PWD}
      lr_tasks=${SLURM_NTASKS:-${SLURM_NPROCS:-1}}
      lr_nodes=${SLURM_JOB_NUM_NODES:-${SLURM_NNODES:-1}}
      lr_array_index=${SLURM_ARRAY_TASK_ID:-}
      lr_array_job=${SLURM_ARRAY_JOB_ID:-}
      ;;
    pbs)
      lr_job_id=${PBS_JOBID:?not inside a PBS job (PBS_JOBID unset)}
      lr_submit_dir=${PBS_O_WORKDIR:-$PWD}
      lr_tasks=${PBS_NP:-}
      lr_nodes=1
      if [[ -n ${PBS_NODEFILE:-} && -r $PBS_NODEFILE ]]; then
        [[ -n $lr_tasks ]] || lr_tasks=$(grep -c . "$PBS_NODEFILE")
        lr_nodes=$(sort -u "$PBS_NODEFILE" | grep -c .)
      fi
      lr_tasks=${lr_tasks:-1}
      # PBS Pro / OpenPBS names them PBS_ARRAY_INDEX and PBS_ARRAY_ID, Torque PBS_ARRAYID.
      lr_array_index=${PBS_ARRAY_INDEX:-${PBS_ARRAYID:-}}
      lr_array_job=${PBS_ARRAY_ID:-}
      if [[ -n $lr_array_index && -z $lr_array_job ]]; then
        lr_array_job=${lr_job_id/\[$lr_array_index\]/[]}
      fi
      ;;
    *) lr_die "unknown scheduler '$lr_flavour' (slurm or pbs)" ;;
  esac
  # Array tasks share the job id in PBS ("12[3].server"): the tag must tell them apart.
  lr_job_tag=$(tr -c 'A-Za-z0-9_.\n-' '_' <<<"$lr_job_id")
  if ! [[ $lr_tasks =~ ^[1-9][0-9]*$ ]]; then
    lr_die "task count '$lr_tasks' is not a positive number"
  fi
}

# `scontrol -o show job` prints KEY=VALUE pairs on one line.
lr_slurm_field() {
  scontrol -o show job "$lr_job_id" | tr ' ' '\n' | sed -n "s/^$1=//p" | head -n 1
}

# The job script as the user submitted it: Slurm and PBS both run a copy.
lr_script_path() {
  local name=$1
  case $lr_flavour in
    slurm) printf '%s\n' "$LONGRUN_JOBS_DIR/slurm/$name.sh" ;;
    pbs) printf '%s\n' "$LONGRUN_JOBS_DIR/pbs/$name.pbs" ;;
  esac
}

# Wall time in seconds, or nothing when it is not known.
lr_walltime_seconds() {
  local text=${PBS_WALLTIME:-}
  if [[ -z $text ]] && command -v qstat >/dev/null; then
    text=$(qstat -f "$lr_job_id" 2>/dev/null | sed -n 's/^ *Resource_List.walltime = //p' |
      head -n 1)
  fi
  [[ -n $text ]] || return 0
  local -a part
  IFS=: read -ra part <<<"$text"
  local seconds=0 p
  for p in "${part[@]}"; do
    seconds=$((seconds * 60 + 10#$p))
  done
  printf '%s\n' "$seconds"
}

# Submits JOB again with the same inputs and RESUBMIT as its counter, after this job.
lr_resubmit() {
  local job=$1 count=$2
  shift 2
  local script
  script=$(lr_script_path "$job")
  local -a command
  case $lr_flavour in
    slurm)
      command=(sbatch --export="ALL,LONGRUN_RESUBMITS=$count"
        --dependency="afterany:$lr_job_id" --nodes="$lr_nodes" --ntasks="$lr_tasks")
      [[ -n ${SLURM_JOB_NAME:-} ]] && command+=(--job-name="$SLURM_JOB_NAME")
      [[ -n ${SLURM_JOB_PARTITION:-} ]] && command+=(--partition="$SLURM_JOB_PARTITION")
      [[ -n ${SLURM_JOB_ACCOUNT:-} ]] && command+=(--account="$SLURM_JOB_ACCOUNT")
      local limit
      limit=$(lr_slurm_field TimeLimit || true)
      [[ -n $limit && $limit != UNLIMITED ]] && command+=(--time="$limit")
      command+=("$script" "$@")
      ;;
    pbs)
      # -V: the inputs travel in LONGRUN_* variables, not as arguments.
      command=(qsub -V -v "LONGRUN_RESUBMITS=$count" -W "depend=afterany:$lr_job_id")
      [[ -n ${PBS_JOBNAME:-} ]] && command+=(-N "$PBS_JOBNAME")
      [[ -n ${PBS_QUEUE:-} ]] && command+=(-q "$PBS_QUEUE")
      command+=("$script")
      ;;
  esac
  # From the submission folder, so the new job has the same one.
  (cd "$lr_submit_dir" && "${command[@]}")
}

# Submits the sweep's gather step, to start when every task of this array has ended well.
lr_submit_gather() {
  local prefix=$1
  local script
  script=$(lr_script_path sweep-gather)
  local -a command
  case $lr_flavour in
    slurm)
      command=(sbatch --dependency="afterok:$lr_array_job" --nodes=1 --ntasks=1)
      [[ -n ${SLURM_JOB_PARTITION:-} ]] && command+=(--partition="$SLURM_JOB_PARTITION")
      [[ -n ${SLURM_JOB_ACCOUNT:-} ]] && command+=(--account="$SLURM_JOB_ACCOUNT")
      command+=("$script" "$prefix")
      ;;
    pbs)
      # Torque spells an array dependency afterokarray; PBS Pro and OpenPBS afterok.
      command=(qsub -V -v "LONGRUN_PREFIX=$prefix" -W "depend=${LONGRUN_PBS_ARRAY_DEPEND:-afterok}:$lr_array_job")
      [[ -n ${PBS_QUEUE:-} ]] && command+=(-q "$PBS_QUEUE")
      command+=("$script")
      ;;
  esac
  (cd "$lr_submit_dir" && "${command[@]}")
}

# --- the work folder -------------------------------------------------------------

lr_make_work_dir() {
  local root=${LONGRUN_SCRATCH:-}
  # TMPDIR is usually local to each node: fine for one node, not for collective
  # MPI-IO from several.
  if [[ -z $root && $lr_nodes -eq 1 && -n ${TMPDIR:-} && -d ${TMPDIR:-} && -w ${TMPDIR:-} ]]; then
    root=$TMPDIR
  fi
  root=${root:-$lr_submit_dir}
  lr_work=$root/longrun-work-$lr_job_tag
  mkdir -p "$lr_work" || lr_die "cannot create the work folder $lr_work"
  lr_say "job $lr_job_id ($lr_flavour): $lr_tasks tasks on $lr_nodes nodes, working in $lr_work"
}

lr_cleanup() {
  lr_stop_timer
  if [[ -n ${lr_work:-} && ${LONGRUN_KEEP_WORK:-0} != 1 ]]; then
    rm -rf "$lr_work"
  fi
}

# --- running longrun, with a stop request passed on -----------------------------

lr_child=""
lr_stop_requested=0
lr_interrupted_wait=0
lr_timer=""

lr_on_stop() {
  lr_stop_requested=1
  lr_interrupted_wait=1
  lr_say "stop requested: passing SIG${LONGRUN_STOP_SIGNAL:-TERM} on so that longrun checkpoints and stops"
  if [[ -n $lr_child ]]; then
    kill -s "${LONGRUN_STOP_SIGNAL:-TERM}" "$lr_child" 2>/dev/null || true
  fi
}

# PBS signals only at the wall time itself, with little time before the kill: ask
# for the stop a margin before.
lr_start_timer() {
  [[ $lr_flavour == pbs ]] || return 0
  local wall
  wall=$(lr_walltime_seconds)
  [[ -n $wall ]] || return 0
  local delay=$((wall - ${LONGRUN_STOP_BEFORE:-300}))
  ((delay > 0)) || delay=1
  local shell_pid=$$
  # Its own trap takes the sleep along when the timer is stopped early.
  (
    trap 'kill "$sleeper" 2>/dev/null; exit 0' TERM
    sleep "$delay" &
    sleeper=$!
    wait "$sleeper" && kill -s TERM "$shell_pid"
  ) &
  lr_timer=$!
}

lr_stop_timer() {
  if [[ -n ${lr_timer:-} ]]; then
    kill "$lr_timer" 2>/dev/null || true
    lr_timer=""
  fi
}

# Runs COMMAND in the background so that the trap can act, and returns its status.
lr_run() {
  lr_say "running: $*"
  "$@" &
  lr_child=$!
  local status
  while true; do
    lr_interrupted_wait=0
    if wait "$lr_child"; then status=0; else status=$?; fi
    ((lr_interrupted_wait)) || break
  done
  lr_child=""
  return "$status"
}

# longrun (with the options file, when one is given) under the launcher.
lr_longrun_command() {
  local parallel=$1
  shift
  lr_command=()
  if ((parallel)); then
    local -a launcher
    read -ra launcher <<<"${LONGRUN_MPIRUN:-mpirun}"
    lr_command+=("${launcher[@]}" -n "$lr_tasks")
  fi
  lr_command+=("${LONGRUN_BINARY:-longrun}")
  local opts=${LONGRUN_OPTIONS_FILE:-}
  if [[ -n $opts ]]; then
    if [[ $opts != */* && ! -e $(lr_absolute "$opts") ]]; then
      opts=$LONGRUN_JOBS_DIR/options/${opts%.opts}.opts
    fi
    opts=$(lr_absolute "$opts")
    [[ -r $opts ]] || lr_die "options file $opts not found"
    lr_command+=(--options-file "$opts")
  fi
  lr_command+=("$@")
}

lr_extra_from_environment() {
  lr_extra=()
  [[ -n ${LONGRUN_EXTRA:-} ]] && read -ra lr_extra <<<"$LONGRUN_EXTRA"
  return 0
}

# --- the jobs ------------------------------------------------------------------------

# generate MODEL CHAIN [generate options]
lr_job_generate() {
  local model=${1:-${LONGRUN_MODEL:-}} chain=${2:-${LONGRUN_CHAIN:-}}
  [[ -n $model && -n $chain ]] || lr_die "usage: generate MODEL.yaml CHAIN.h5 [generate options]"
  lr_extra_from_environment
  (($# > 2)) && lr_extra=("${@:3}")
  model=$(lr_absolute "$model")
  chain=$(lr_absolute "$chain")
  lr_make_work_dir
  local out
  out=$lr_work/$(basename "$chain")
  # Rank 0 explores alone; more ranks would only wait.
  lr_longrun_command 0 generate "$model" -o "$out" "${lr_extra[@]}"
  local status=0
  lr_run "${lr_command[@]}" || status=$?
  ((status == 0)) || return "$status"
  lr_deliver "$out" "$chain"
}

# solve CHAIN RESULT [solve options]: checkpoints, and resubmits itself when stopped.
lr_job_solve() {
  local chain=${1:-${LONGRUN_CHAIN:-}} result=${2:-${LONGRUN_RESULT:-}}
  [[ -n $chain && -n $result ]] || lr_die "usage: solve CHAIN.h5 RESULT.h5 [solve options]"
  lr_extra_from_environment
  (($# > 2)) && lr_extra=("${@:3}")
  chain=$(lr_absolute "$chain")
  result=$(lr_absolute "$result")
  local checkpoint_dir
  checkpoint_dir=$(dirname "$result")
  [[ -n ${LONGRUN_CHECKPOINT_DIR:-} ]] && checkpoint_dir=$(lr_absolute "$LONGRUN_CHECKPOINT_DIR")
  mkdir -p "$checkpoint_dir"
  local checkpoint
  checkpoint=$checkpoint_dir/$(basename "${result%.h5}").checkpoint.h5
  local count=${LONGRUN_RESUBMITS:-0} most=${LONGRUN_MAX_RESUBMITS:-10}
  lr_make_work_dir
  local out
  out=$lr_work/$(basename "$result")
  # Open MPI's mpirun kills the ranks 1 s after passing SIGTERM on, too soon for a
  # checkpoint. The longer wait costs twice its length whenever a rank exits non-zero
  # (measured with Open MPI 4.1), hence a moderate default. SIGUSR1/2 it passes on
  # without killing anyone.
  case ${LONGRUN_STOP_SIGNAL:-TERM} in
    TERM | SIGTERM | INT | SIGINT)
      export OMPI_MCA_odls_base_sigkill_timeout=${OMPI_MCA_odls_base_sigkill_timeout:-${LONGRUN_STOP_GRACE:-60}}
      ;;
  esac
  # --resume of a checkpoint that does not exist yet starts from the beginning.
  lr_longrun_command 1 solve "$chain" -o "$out" --checkpoint "$checkpoint" \
    --checkpoint-every "${LONGRUN_CHECKPOINT_EVERY:-600}" --resume "$checkpoint" "${lr_extra[@]}"
  lr_start_timer
  local status=0
  lr_run "${lr_command[@]}" || status=$?
  lr_stop_timer
  lr_say "solve ended with exit code $status (resubmission $count of at most $most)"
  if ((status == 0)); then
    [[ -f $out ]] || lr_die "solve reported success but wrote no $out"
    lr_deliver "$out" "$result" || return $?
    rm -f "$checkpoint"
    return 0
  fi
  # 7: longrun checkpointed and stopped. mpirun itself reports a forwarded SIGTERM
  # as 1, and a rank that did not survive it as something above 7; after our own
  # stop request those mean the same, as long as a checkpoint is there.
  local stopped=0
  ((status == 7)) && stopped=1
  if ((lr_stop_requested && (status == 1 || status > 7))) && [[ -f $checkpoint ]]; then
    stopped=1
  fi
  ((stopped)) || return "$status"
  if ((count >= most)); then
    lr_say "not resubmitting: already resubmitted $count times (LONGRUN_MAX_RESUBMITS=$most);"
    lr_say "submit the same job again to go on from $checkpoint"
    return 7
  fi
  lr_resubmit solve "$((count + 1))" "$@" || lr_die "resubmission failed; submit the same job again to go on from $checkpoint"
  lr_say "resubmitted to go on from $checkpoint"
  # Not 0: a follow-up job with afterok on this one must not start on no result.
  return 7
}

# summarize RESULT [summarize options]: adds /summary to RESULT and writes
# RESULT-report.html and RESULT-summary.json beside it (names without .h5).
lr_job_summarize() {
  local result=${1:-${LONGRUN_RESULT:-}}
  [[ -n $result ]] || lr_die "usage: summarize RESULT.h5 [summarize options]"
  lr_extra_from_environment
  (($# > 1)) && lr_extra=("${@:2}")
  result=$(lr_absolute "$result")
  [[ -f $result ]] || lr_die "$result not found"
  local base
  base=$(basename "${result%.h5}")
  lr_make_work_dir
  local copy
  copy=$lr_work/$(basename "$result")
  cp "$result" "$copy" || lr_die "cannot copy $result to $copy"
  # The chain is found by the path recorded in the result (absolute when solve ran
  # as a job here); --chain among the options names another.
  lr_longrun_command 1 summarize "$copy" --report "$lr_work/$base-report.html" \
    --json "$lr_work/$base-summary.json" "${lr_extra[@]}"
  local status=0
  lr_run "${lr_command[@]}" || status=$?
  ((status == 0)) || return "$status"
  local dir
  dir=$(dirname "$result")
  lr_deliver "$lr_work/$base-report.html" "$dir/$base-report.html" &&
    lr_deliver "$lr_work/$base-summary.json" "$dir/$base-summary.json" &&
    lr_deliver "$copy" "$result"
}

# sweep MODEL PREFIX [sweep options]: one array task, one point (--only the task
# index); the first task also submits the gather job.
lr_job_sweep() {
  local model=${1:-${LONGRUN_MODEL:-}} prefix=${2:-${LONGRUN_PREFIX:-}}
  [[ -n $model && -n $prefix ]] || lr_die "usage: sweep MODEL.yaml PREFIX [sweep options]"
  [[ -n $lr_array_index ]] || lr_die "sweep is a job array: submit it with --array (Slurm) or -J (PBS)"
  lr_extra_from_environment
  (($# > 2)) && lr_extra=("${@:3}")
  model=$(lr_absolute "$model")
  prefix=$(lr_absolute "$prefix")
  if ((lr_array_index == ${SLURM_ARRAY_TASK_MIN:-0})); then
    lr_submit_gather "$prefix" || lr_die "could not submit the gather job"
  fi
  lr_make_work_dir
  local local_prefix
  local_prefix=$lr_work/$(basename "$prefix")
  lr_longrun_command 1 sweep "$model" -o "$local_prefix" --only "$lr_array_index" \
    --work "$lr_work/points" "${lr_extra[@]}"
  local status=0
  lr_run "${lr_command[@]}" || status=$?
  ((status == 0)) || return "$status"
  local point=.point-$lr_array_index.json
  lr_deliver "$local_prefix$point" "$prefix$point"
}

# sweep-gather PREFIX: the table, files and crossing from every point.
lr_job_sweep_gather() {
  local prefix=${1:-${LONGRUN_PREFIX:-}}
  [[ -n $prefix ]] || lr_die "usage: sweep-gather PREFIX"
  prefix=$(lr_absolute "$prefix")
  lr_make_work_dir
  local local_prefix point
  local_prefix=$lr_work/$(basename "$prefix")
  for point in "$prefix".point-*.json; do
    [[ -e $point ]] || lr_die "no points to gather: $prefix.point-*.json"
    cp "$point" "$lr_work/" || lr_die "cannot copy $point to $lr_work"
  done
  lr_longrun_command 0 sweep --gather "$local_prefix"
  local status=0
  lr_run "${lr_command[@]}" || status=$?
  ((status == 0)) || return "$status"
  local made
  for made in "$local_prefix".* "$local_prefix"-*; do
    [[ -f $made && $made != *.point-*.json ]] || continue
    lr_deliver "$made" "$(dirname "$prefix")/$(basename "$made")" || return $?
  done
}

# --- entry point ------------------------------------------------------------------------

# longrun_job FLAVOUR JOB [ARGS]: FLAVOUR slurm or pbs; JOB generate, solve, summarize,
# sweep or sweep-gather.
longrun_job() {
  lr_flavour=$1
  local job=$2
  shift 2
  [[ -n ${LONGRUN_JOBS_DIR:-} ]] || lr_die "LONGRUN_JOBS_DIR is not set"
  export LONGRUN_JOBS_DIR
  lr_read_environment
  trap lr_cleanup EXIT
  trap lr_on_stop TERM INT USR1
  local status=0
  case $job in
    generate) lr_job_generate "$@" || status=$? ;;
    solve) lr_job_solve "$@" || status=$? ;;
    summarize) lr_job_summarize "$@" || status=$? ;;
    sweep) lr_job_sweep "$@" || status=$? ;;
    sweep-gather) lr_job_sweep_gather "$@" || status=$? ;;
    *) lr_die "unknown job '$job'" ;;
  esac
  exit "$status"
}
