#!/usr/bin/env bash
# Sets up a fresh Debian machine and runs the whole test suite:
#   1. installs the Debian packages (deploy/install-deps.sh, idempotent),
#   2. builds Release with warnings as errors,
#   3. runs every CTest suite,
#   4. checks clang-format,
#   5. ASan + UBSan pass, libFuzzer targets for a bounded time, ThreadSanitizer
#      pass over the storage and service tests (each skippable, below).
# .ci/run calls this script and nothing else.
set -euo pipefail
cd "$(dirname "$0")/.."
JOBS="${TAUT_JOBS:-2}"

bash deploy/install-deps.sh
cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=Release -DTAUT_WERROR=ON
cmake --build build -j"$JOBS"
ctest --test-dir build --output-on-failure -j"$JOBS" --timeout 900
bash deploy/check-format.sh

# Second pass under AddressSanitizer + UndefinedBehaviorSanitizer (no
# benchmarks). TAUT_SKIP_SANITIZE=1 skips it for a quick local run.
if [ "${TAUT_SKIP_SANITIZE:-0}" != "1" ]; then
  # -O1 -g1: line tables for the sanitizer reports, and a third of the
  # compile time of RelWithDebInfo's -O2 -g (estimation/identify.cpp under
  # ASan: 75 s against 189 s, measured on this 2-core machine).
  cmake -S . -B build-asan -G Ninja -DCMAKE_BUILD_TYPE=RelWithDebInfo -DTAUT_WERROR=ON \
    -DCMAKE_CXX_FLAGS_RELWITHDEBINFO="-O1 -g1 -DNDEBUG" -DTAUT_SANITIZE=ON -DTAUT_BUILD_BENCH=OFF
  cmake --build build-asan -j"$JOBS"
  # The coverage study, the hard-record families (the relaxed-prior and
  # rival-numbering refits make them many identifications each) and the
  # statistical replication tests (coverage over 120 noisy records, the
  # time-domain fits and the full-window impact identification, the 3-DOF
  # scatter check) repeat code paths that other tests run once under the
  # sanitizers, and take most of the sanitized test time: they carry the
  # CTest label slow-under-sanitizers (tests/*/CMakeLists.txt,
  # SLOW_UNDER_SANITIZERS) and the Release pass above runs them.
  ASAN_OPTIONS=detect_leaks=1:abort_on_error=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
    ctest --test-dir build-asan --output-on-failure -j"$JOBS" --timeout 1800 -LE 'slow-under-sanitizers'
fi

# libFuzzer (clang): the member reader, the supplied-modes reader, the JSON
# record reader, the router and the CSV reader, each for TAUT_FUZZ_SECONDS (default 20) from its committed
# seed corpus (fuzz/corpus/<target>, copied: new inputs do not dirty the
# clone). A crash, a leak, a timeout (10 s per input) or a 2 GB input
# fails the run. TAUT_SKIP_FUZZ=1 skips it.
if [ "${TAUT_SKIP_FUZZ:-0}" != "1" ]; then
  cmake -S . -B build-fuzz -G Ninja -DCMAKE_BUILD_TYPE=RelWithDebInfo -DCMAKE_CXX_COMPILER=clang++ \
    -DCMAKE_CXX_FLAGS_RELWITHDEBINFO="-O1 -g1 -DNDEBUG" \
    -DTAUT_FUZZ=ON -DTAUT_BUILD_TESTS=OFF -DTAUT_BUILD_BENCH=OFF
  cmake --build build-fuzz -j"$JOBS" --target fuzz_member fuzz_modes fuzz_record_json fuzz_router fuzz_csv
  for target in member modes record_json router csv; do
    corpus="$(mktemp -d)"
    cp fuzz/corpus/"$target"/* "$corpus"/
    build-fuzz/fuzz/fuzz_"$target" -max_total_time="${TAUT_FUZZ_SECONDS:-20}" -timeout=10 \
      -rss_limit_mb=2048 -max_len=65536 -print_final_stats=1 "$corpus"
    rm -rf "$corpus"
  done
fi

# ThreadSanitizer over the storage and service tests (connection pool, job
# queue, workers, webhook threads, the HTTP connection policy). Only those
# targets are built. TAUT_SKIP_TSAN=1 skips it.
if [ "${TAUT_SKIP_TSAN:-0}" != "1" ]; then
  cmake -S . -B build-tsan -G Ninja -DCMAKE_BUILD_TYPE=RelWithDebInfo -DTAUT_WERROR=ON -DTAUT_TSAN=ON \
    -DCMAKE_CXX_FLAGS_RELWITHDEBINFO="-O1 -g1 -DNDEBUG" \
    -DTAUT_BUILD_BENCH=OFF
  cmake --build build-tsan -j"$JOBS" --target taut test_storage test_http_api test_service
  export TSAN_OPTIONS="halt_on_error=1:second_deadlock_stack=1:suppressions=$PWD/deploy/tsan-suppressions.txt"
  build-tsan/tests/storage/test_storage
  build-tsan/tests/server/test_http_api
  build-tsan/tests/server/test_service
  unset TSAN_OPTIONS
fi
