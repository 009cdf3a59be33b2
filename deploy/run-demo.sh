#!/usr/bin/env bash
# Sets up a fresh Debian machine, builds taut and runs the main job on an
# embedded default: an invented 5.8 m wrought-iron tie (examples/) carrying
# 30 kN. taut first prints the tie's modes from the beam model, then
# simulates a 5-minute ambient vibration record with the nonlinear model (as a
# site gateway would upload), identifies the modes from that record, and
# estimates the axial force, bending stiffness and end fixities with their
# intervals, cautions and the standing notice.
set -euo pipefail
cd "$(dirname "$0")/.."
bash deploy/install-deps.sh
cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build build -j"${TAUT_JOBS:-2}" --target taut
MEMBER=examples/maltings-east-tie-2.json
RECORD="$(mktemp -d)/maltings-east-tie-2.csv"

echo
echo "== 1. taut modes: the tie at 30 kN, vertical plane (self-weight sag included) =="
./build/taut modes --member "$MEMBER" --axial-force 30000 --modes 4
echo
echo "== 2. taut simulate: a 300 s ambient record at 512 Hz from the nonlinear model -> $RECORD =="
./build/taut simulate --member "$MEMBER" --axial-force 30000 --ambient 2 --seed 7 \
  --duration 300 --rate 512 --damping 0.005 --temperature 11.5 \
  --recorded-at 2026-11-20T10:00:00Z --output "$RECORD"
echo "written: $(wc -l < "$RECORD") lines"
echo
echo "== 3. taut modal: modes identified from the record =="
./build/taut modal --record "$RECORD" --member "$MEMBER"
echo
echo "== 4. taut identify: axial force, bending stiffness and end fixity (truth: 30 kN, r = 0.5 / 0.5) =="
./build/taut identify --member "$MEMBER" --record "$RECORD"
