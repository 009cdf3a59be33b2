#!/usr/bin/env bash
# The Debian package of taut (deploy/packaging.cmake), checked the way an
# operator would meet it:
#   1. `cpack -G DEB` builds it from the build tree;
#   2. it unpacks into a scratch root (dpkg -x) with the executable, the unit,
#      the sysusers entry, the configuration example and the man page;
#   3. the unpacked `taut --version` prints the project version;
#   4. the unpacked `taut serve` starts from the packaged configuration example
#      (database and port redirected on the command line, which wins over it);
#   5. `systemd-analyze verify` accepts the unit without a single warning
#      (ExecStart pointed at the unpacked executable, which verify requires to
#      exist), and groff reads the man page without a warning.
# Usage: test_package.sh BUILD_DIR EXPECTED_VERSION
set -euo pipefail
build_dir=$1
version=$2
work=$(mktemp -d)
server_pid=""
cleanup() {
  if [ -n "$server_pid" ]; then kill "$server_pid" 2>/dev/null || true; wait "$server_pid" 2>/dev/null || true; fi
  rm -rf "$work"
}
trap cleanup EXIT
fail() { echo "FAIL: $*" >&2; exit 1; }

(cd "$build_dir" && cpack -G DEB -B "$work/pkg" >"$work/cpack.log" 2>&1) || { cat "$work/cpack.log"; fail "cpack"; }
shopt -s nullglob
debs=("$work"/pkg/taut_"$version"_*.deb)
[ ${#debs[@]} -eq 1 ] || fail "expected one taut_${version}_*.deb in $work/pkg, found ${#debs[@]}"
deb=${debs[0]}
deps=$(dpkg-deb -f "$deb" Depends)
case "$deps" in *libceres*|*libsqlite3*) ;; *) fail "Depends does not name the shared libraries: $deps" ;; esac
dpkg-deb --ctrl-tarfile "$deb" | tar -t | grep -qx './postinst' || fail "no postinst in the package"

root="$work/root"
dpkg -x "$deb" "$root"
for f in usr/bin/taut usr/lib/systemd/system/taut.service usr/lib/systemd/system/taut-postgres@.service \
         usr/lib/sysusers.d/taut.conf usr/share/doc/taut/taut.conf.example \
         usr/share/doc/taut/taut-postgres.conf.example usr/share/doc/taut/OPERATIONS.md usr/share/man/man1/taut.1; do
  [ -e "$root/$f" ] || fail "the package lacks /$f"
done

got=$("$root/usr/bin/taut" --version)
[ "$got" = "taut $version" ] || fail "taut --version printed '$got', expected 'taut $version'"

# The packaged configuration example must be accepted as it stands.
"$root/usr/bin/taut" serve --config "$root/usr/share/doc/taut/taut.conf.example" \
  --db "$work/t.db" --listen 127.0.0.1:0 >"$work/serve.out" 2>"$work/serve.err" &
server_pid=$!
for _ in $(seq 1 100); do
  grep -q 'listening on http://127.0.0.1:' "$work/serve.out" && break
  kill -0 "$server_pid" 2>/dev/null || { cat "$work/serve.err"; fail "taut serve exited with the example configuration"; }
  sleep 0.1
done
grep -q 'listening on http://127.0.0.1:' "$work/serve.out" || fail "taut serve did not start within 10 s"
kill "$server_pid"; wait "$server_pid" || true; server_pid=""
[ -s "$work/t.db" ] || fail "taut serve did not create its database"

# Both units: SQLite, and an instance of the PostgreSQL replicas' template.
for unit in taut.service taut-postgres@8081.service; do
  template=${unit/@8081/@}
  sed "s#/usr/bin/taut#$root/usr/bin/taut#" "$root/usr/lib/systemd/system/$template" >"$work/$unit"
  if ! out=$(systemd-analyze verify --man=no "$work/$unit" 2>&1) || [ -n "$out" ]; then
    echo "$out" >&2
    fail "systemd-analyze verify $unit"
  fi
done
if ! out=$(groff -man -ww -z "$root/usr/share/man/man1/taut.1" 2>&1) || [ -n "$out" ]; then
  echo "$out" >&2
  fail "groff warnings in taut.1"
fi
echo "package checks passed: $(basename "$deb")"
