#!/usr/bin/env bash
# Installs the Debian packages that building, testing and benchmarking taut
# need. Idempotent: packages already installed are skipped, and apt is not
# touched at all when everything is present.
#
# Usage: deploy/install-deps.sh            (as root, or with sudo available)
set -euo pipefail

PACKAGES=(
  build-essential     # g++ 12 (C++20), make
  cmake               # build system (>= 3.20)
  ninja-build         # faster incremental builds than make
  pkg-config
  libeigen3-dev       # model/: dense and sparse linear algebra
  libspectra-dev      # model/: a few eigenpairs by shift-invert Lanczos
  libceres-dev        # estimation/: nonlinear least squares, covariance
  libcpp-httplib-dev  # server/: HTTP
  nlohmann-json3-dev  # server/: JSON
  libsqlite3-dev      # storage/
  libpq-dev           # storage/: the PostgreSQL backend (libpq)
  postgresql          # tests/storage: a real server started by test_postgres
  libssl-dev          # SHA-256 of uploads, token hashes
  libcli11-dev        # command-line parsing of the taut executable
  nginx               # deploy/nginx: reverse proxy; tests/server/test_hostile_clients runs it
  libgtest-dev        # tests
  libgmock-dev
  libbenchmark-dev    # bench/
  python3-numpy       # reference checks (scipy.signal.welch) in tests
  python3-scipy
  clang-format        # style check
  chromium            # tests/ui: the dashboard end to end in a headless browser
  chromium-driver     # tests/ui: WebDriver (plain HTTP + JSON) that drives it
  dpkg-dev            # the Debian package: CPack's dpkg-shlibdeps writes Depends
  systemd             # tests/deploy: systemd-analyze verify of the unit
  groff-base          # tests/deploy: the man page read without warnings
  poppler-utils       # tests/ui: pdftotext reads the inspection report PDF back
)

missing=()
for p in "${PACKAGES[@]}"; do
  if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
    missing+=("$p")
  fi
done

if [ ${#missing[@]} -eq 0 ]; then
  echo "install-deps: all ${#PACKAGES[@]} packages already installed"
  exit 0
fi

SUDO=""
if [ "$(id -u)" -ne 0 ]; then SUDO="sudo"; fi
echo "install-deps: installing ${missing[*]}"
export DEBIAN_FRONTEND=noninteractive
$SUDO apt-get update -qq
$SUDO apt-get install -y -qq --no-install-recommends "${missing[@]}"
echo "install-deps: done"
