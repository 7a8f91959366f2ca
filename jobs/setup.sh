#!/usr/bin/env bash
# One entry point for a fresh Debian machine:
#   bash jobs/setup.sh demo   install packages, build, solve the shipped demo chain
#   bash jobs/setup.sh test   install packages, build, run every test (CI runs this)
set -euo pipefail

here=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
cd "$here"
build=${LONGRUN_BUILD:-build}
jobs=$(nproc 2>/dev/null || echo 2)

packages=(
  build-essential cmake pkg-config git
  openmpi-bin libopenmpi-dev libhdf5-openmpi-dev
  petsc-dev slepc-dev
  libpetsc64-real3.18-dev libslepc64-real3.18-dev
  libcli11-dev nlohmann-json3-dev libfmt-dev libgtest-dev
  libyaml-cpp-dev libmuparser-dev
  libplplot-dev plplot-driver-cairo
  python3 python3-numpy python3-scipy python3-h5py
  chromium chromium-driver python3-selenium
  clang-format clang-14 libclang-rt-14-dev shellcheck
)

install_packages() {
  local missing=()
  for p in "${packages[@]}"; do
    dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" ||
      missing+=("$p")
  done
  ((${#missing[@]} == 0)) && return 0
  echo "installing: ${missing[*]}"
  local sudo=()
  ((EUID == 0)) || sudo=(sudo)
  "${sudo[@]}" apt-get update -qq
  DEBIAN_FRONTEND=noninteractive "${sudo[@]}" apt-get install -y -qq --no-install-recommends \
    "${missing[@]}"
}

build_release() {
  cmake -S . -B "$build" -DCMAKE_BUILD_TYPE=Release
  cmake --build "$build" -j "$jobs"
}

# mpirun refuses root unless told otherwise; containers and CI run as root.
mpi_env() {
  if ((EUID == 0)); then
    export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
  fi
  export OMP_NUM_THREADS=1
}

run_demo() {
  mpi_env
  local out="$build/demo"
  mkdir -p "$out"
  echo "== longrun solve on 1 rank"
  "$build/src/longrun" solve jobs/demo/parcel-hub.h5 -o "$out/hub-result.h5"
  echo
  echo "== the same on 2 ranks"
  mpirun -n 2 --oversubscribe "$build/src/longrun" solve jobs/demo/parcel-hub.h5 \
    -o "$out/hub-result-2ranks.h5" --quiet
  echo
  echo "== a model description: generate its chain, then solve it"
  "$build/src/longrun" generate jobs/models/help-desk.yaml -o "$out/help-desk.h5"
  "$build/src/longrun" solve "$out/help-desk.h5" -o "$out/help-desk-result.h5" --quiet
  echo
  echo "== the answers: measures, tails, event rates, plots and a report to share"
  mkdir -p "$out/plots"
  "$build/src/longrun" summarize "$out/help-desk-result.h5" --top 3 \
    --tail "all_busy=busy==advisers" --given "busy==advisers" \
    --rate "lost_fraction=caller_lost/(caller_lost+call_answered_at_once+call_put_on_hold)" \
    --plot "$out/plots/help-desk" --report "$out/help-desk-report.html"
  echo
  echo "== up to which arrival rate are all advisers busy less than 80 % of the time?"
  "$build/src/longrun" sweep jobs/models/help-desk.yaml --vary arrival=2:4:0.25 \
    --tail "all_busy=busy==advisers" --until "P(all_busy) > 0.8" -o "$out/plots/arrival" --quiet
  echo
  echo "results: $out/hub-result.h5, $out/hub-result-2ranks.h5, $out/help-desk-result.h5"
  echo "(open with h5dump or h5py); report: $out/help-desk-report.html; sweep: $out/plots/arrival.csv"
}

check_format() {
  local files
  mapfile -t files < <(git ls-files '*.cpp' '*.hpp')
  ((${#files[@]} == 0)) && return 0
  clang-format --dry-run --Werror "${files[@]}"
  echo "clang-format: ${#files[@]} files clean"
}

# The readers of untrusted bytes under libFuzzer for a short while, from the seed
# corpora in tests/fuzz/corpus (copied: the fuzzer adds what it finds to the
# folder it is given). Any crash, sanitizer report or broken invariant fails CI;
# the input that caused it is left in $build-fuzz/artifacts/.
run_fuzz() {
  local fuzz="$build-fuzz"
  CC=clang-14 CXX=clang++-14 cmake -S . -B "$fuzz" -DCMAKE_BUILD_TYPE=RelWithDebInfo \
    -DLONGRUN_TESTS=OFF -DLONGRUN_FUZZ=ON
  cmake --build "$fuzz" -j "$jobs" --target fuzz_matrix_market fuzz_chain_validate
  mkdir -p "$fuzz/artifacts"
  local target seconds work
  # The Matrix Market reader is slow per input under the sanitizers (a 4 MiB
  # read buffer per file), so it gets the longer share.
  for target in fuzz_matrix_market:60 fuzz_chain_validate:30; do
    seconds=${target#*:}
    target=${target%%:*}
    work=$(mktemp -d)
    cp -r "tests/fuzz/corpus/$target/." "$work/"
    echo "== $target for ${seconds} s"
    "$fuzz/tests/fuzz/$target" "$work" -max_total_time="$seconds" -rss_limit_mb=2048 \
      -timeout=10 -print_final_stats=1 -artifact_prefix="$fuzz/artifacts/$target-" ||
      {
        rm -rf "$work"
        return 1
      }
    rm -rf "$work"
  done
}

# The 64-bit-index variant (chains past 2^31 - 1 transitions per matrix): the
# solver library and one MPI test against Debian's PETSc64/SLEPc64.
run_index64_test() {
  cmake -S . -B "$build-index64" -DCMAKE_BUILD_TYPE=Release -DLONGRUN_INDEX64=ON
  cmake --build "$build-index64" -j "$jobs" --target test_index64
  ctest --test-dir "$build-index64" --output-on-failure --no-tests=error -R '^test_index64_'
}

run_tests() {
  mpi_env
  check_format
  ctest --test-dir "$build" --output-on-failure --no-tests=error -j "$jobs"
  run_index64_test
  # Unit tests again under address and undefined-behaviour sanitizers.
  cmake -S . -B "$build-asan" -DCMAKE_BUILD_TYPE=Debug -DLONGRUN_SANITIZE=ON
  cmake --build "$build-asan" -j "$jobs" --target longrun_unit_tests
  # Open MPI keeps some memory until exit by design; leaks are not what this checks.
  ASAN_OPTIONS=detect_leaks=0:abort_on_error=1 UBSAN_OPTIONS=halt_on_error=1:print_stacktrace=1 \
    ctest --test-dir "$build-asan" --output-on-failure --no-tests=error -L unit
  run_fuzz
}

case "${1:-}" in
  demo) install_packages && build_release && run_demo ;;
  test) install_packages && build_release && run_tests ;;
  *)
    echo "usage: bash jobs/setup.sh demo|test" >&2
    exit 1
    ;;
esac
