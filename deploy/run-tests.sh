#!/usr/bin/env bash
# Sets up a fresh Debian machine and runs the whole test suite:
#   1. installs the Debian packages (deploy/install-deps.sh, idempotent),
#   2. builds Release with warnings as errors,
#   3. runs every CTest suite,
#   4. checks clang-format.
# .ci/run calls this script and nothing else.
set -euo pipefail
cd "$(dirname "$0")/.."
JOBS="${TAUT_JOBS:-2}"

bash deploy/install-deps.sh
cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=Release -DTAUT_WERROR=ON
cmake --build build -j"$JOBS"
ctest --test-dir build --output-on-failure -j"$JOBS" --timeout 900
bash deploy/check-format.sh
