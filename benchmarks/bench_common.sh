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
