#!/usr/bin/env bash
# Sets up a fresh Debian machine, builds taut and runs it on the example
# member shipped in examples/ (an invented 5.8 m wrought-iron tie).
set -euo pipefail
cd "$(dirname "$0")/.."
bash deploy/install-deps.sh
cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build build -j"${TAUT_JOBS:-2}" --target taut
echo
echo "== taut modes: the example tie at 30 kN, vertical plane (self-weight sag included) =="
./build/taut modes --member examples/maltings-east-tie-2.json --axial-force 30000
echo
echo "== the same tie, lateral plane (no sag term) =="
./build/taut modes --member examples/maltings-east-tie-2.json --axial-force 30000 --direction lateral --modes 3
