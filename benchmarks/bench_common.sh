# Shared by the benchmark scripts: sourced after `build` and `python` are set.
# shellcheck shell=bash disable=SC2154,SC2034  # build, python in; longrun, family out

die() {
    echo "${0##*/}: $*" >&2
    exit 2
}

find_binary() { # NAME: the first of BUILD/src/NAME, BUILD/benchmarks/NAME, BUILD/NAME, BUILD/bin/NAME
    local candidate
    for candidate in "$build/src/$1" "$build/benchmarks/$1" "$build/$1" "$build/bin/$1"; do
        if [[ -x "$candidate" && -f "$candidate" ]]; then
            (cd "$(dirname "$candidate")" && echo "$(pwd)/$1")
            return 0
        fi
    done
    return 1
}

# Sets `longrun` and `family`, or stops with a line saying what is missing.
require_binaries() {
    [[ -d "$build" ]] || die "build folder '$build' does not exist (build first, see DEVELOPERS.md)"
    longrun="$(find_binary longrun)" || die "no longrun binary under '$build'"
    family="$(find_binary longrun-family)" || die "no longrun-family binary under '$build'"
    for tool in mpirun /usr/bin/time timeout "$python"; do
        command -v "$tool" > /dev/null || die "'$tool' is not available"
    done
}

# Sets cores, memory_gib, cpu_model, source_dir, source_commit, built, version and
# started: the facts every report opens with. Call before OMP_NUM_THREADS is set
# (nproc honours it) and after require_binaries (needs longrun).
describe_machine() {
    cores="$(nproc)"
    memory_gib="$(free -g | awk '/^Mem:/ {print $2}')"
    cpu_model="$(grep -m1 '^model name' /proc/cpuinfo | cut -d: -f2- | sed 's/^ *//')"
    # What was measured: the binaries' source folder (from the build's CMake cache) and,
    # when that is a git checkout, its commit; the repository's HEAD may have moved on.
    source_dir="$(sed -n 's/^CMAKE_HOME_DIRECTORY:INTERNAL=//p' "$build/CMakeCache.txt" 2> /dev/null || true)"
    source_commit="$(git -C "${source_dir:-/nonexistent}" describe --always --dirty 2> /dev/null ||
        echo "not a git checkout")"
    built="$(date -u -r "$longrun" '+%Y-%m-%d %H:%M UTC')"
    version="$("$longrun" --version 2> /dev/null || echo "longrun (version unknown)")"
    started="$(date -u '+%Y-%m-%d %H:%M UTC')"
}

# Clock ticks all cores spent busy (user, nice, system, irq, softirq) since boot:
# the difference over a run, less the run's own CPU, is everything else's noise.
busy_ticks() {
    local _cpu user nice system _idle _iowait irq softirq _rest
    read -r _cpu user nice system _idle _iowait irq softirq _rest < /proc/stat
    echo "$((user + nice + system + irq + softirq))"
}

# Both need `work`, `records`, `limit` and `failures` set by the script.
# record ID CHAIN SOLVER RANKS STATUS START END BUSY OUTPUT: one line of the records.
record() {
    printf '%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\n' "$@" >> "$records"
}

# run_timed ID CHAIN SOLVER RANKS OUTPUT MUST -- COMMAND...
# Runs COMMAND with stdout to WORK/ID.json and stderr to WORK/ID.err, timed, and
# records it. Never fails: a failed run is recorded, and counted as a failure of the
# suite when MUST is "must".
run_timed() {
    local id="$1" chain="$2" solver="$3" ranks="$4" output="$5" must="$6"
    shift 7
    local busy_before busy_after start end rc=0
    busy_before="$(busy_ticks)"
    echo "[$(date +%T)] $id: $*" >&2
    start="$(date +%s.%N)"
    /usr/bin/time -v -o "$work/$id.time" timeout "$limit" "$@" \
        > "$work/$id.json" 2> "$work/$id.err" || rc=$?
    end="$(date +%s.%N)"
    busy_after="$(busy_ticks)"
    if [[ "$rc" -ne 0 ]]; then
        [[ "$must" == must ]] && failures=$((failures + 1))
        echo "[$(date +%T)] $id ended with exit status $rc; last lines of its stderr:" >&2
        tail -n 5 "$work/$id.err" >&2 || true
    fi
    record "$id" "$chain" "$solver" "$ranks" "$rc" "$start" "$end" \
        "$((busy_after - busy_before))" "$output"
}

# start_run STEM: the run's work folder (WORK_DIR as given, else a fresh mktemp folder,
# removed at the end unless LONGRUN_BENCH_KEEP=1 or a run failed), the machine facts,
# the environment every run gets, and an empty records file. Sets work, records and
# failures, and the facts of describe_machine.
start_run() {
    if [[ -z "$work" ]]; then
        work="$(mktemp -d "${TMPDIR:-/tmp}/longrun-$1.XXXXXX")"
        if [[ "${LONGRUN_BENCH_KEEP:-0}" != 1 ]]; then
            # Kept when a run failed, for its logs.
            trap 'if [[ "${failures:-0}" -eq 0 ]]; then rm -rf -- "$work"; fi' EXIT
        fi
    fi
    mkdir -p "$work"
    work="$(cd "$work" && pwd)"
    describe_machine # before OMP_NUM_THREADS is set: nproc honours it
    export OMP_NUM_THREADS=1
    if [[ "$(id -u)" -eq 0 ]]; then # Open MPI refuses root without these
        export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
    fi
    records="$work/records.tsv"
    : > "$records"
    failures=0
    echo "work folder: $work" >&2
}
