#!/usr/bin/env bash
# Sets up a fresh Debian machine, builds taut and runs `taut demo`: the whole
# job on an embedded, invented portfolio. The demo creates a temporary SQLite
# file, starts the service (HTTP API + identification workers) on a loopback
# port, registers a covered market hall with six tie-rods and a footbridge
# with four hangers, simulates 30 days of records with the beam model
# (temperature cycles; one hanger slowly losing force), uploads them through
# the API as a site gateway would, waits for the estimates and prints each
# structure's portfolio (force with its 95 % interval beside the simulated
# truth), the drift alerts and their webhook deliveries.
#
# Arguments are passed to `taut demo` (e.g. --days 10, --db demo.db --serve).
set -euo pipefail
cd "$(dirname "$0")/.."
bash deploy/install-deps.sh
cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build build -j"${TAUT_JOBS:-2}" --target taut
exec ./build/taut demo "$@"
