#!/usr/bin/env bash
# Stages `cmake --install` of a built tree (DESTDIR) and checks what a station would get: every
# file in its place, a unit that names the installed paths and keeps the watchdog, an installed
# station config that loads with the installed profiles and recipes, one version in all three
# binaries, man pages made from --help, and sysusers.d/tmpfiles.d entries for the daemon's user
# and folders. Needs the full build (binaries and man pages). Nothing outside the stage is written.
# Usage: install_test.sh BUILD_DIR PREFIX SYSCONFDIR
set -euo pipefail
build=$1 prefix=$2 sysconf=$3
stage=$(mktemp -d "${TMPDIR:-/tmp}/echoline-install-XXXXXX")
trap 'rm -rf "$stage"' EXIT
failures=0
fail() { echo "FAIL: $*" >&2; failures=$((failures + 1)); }
has() { [ -e "$stage$1" ] || fail "not installed: $1"; }

DESTDIR="$stage" cmake --install "$build" >/dev/null

for f in bin/echolined bin/echoline bin/echoline-sim lib/systemd/system/echolined.service \
         lib/sysusers.d/echoline.conf lib/tmpfiles.d/echoline.conf share/echoline/sim/instant.jsonc \
         share/doc/echoline/README.md share/doc/echoline/API.md share/doc/echoline/config/README.md \
         share/man/man1/echolined.1.gz share/man/man1/echoline.1.gz share/man/man1/echoline-sim.1.gz; do
  has "$prefix/$f"
done
for f in station.jsonc instruments/sim-source.jsonc instruments/generic-scpi-receiver.jsonc recipes/whip915.jsonc; do
  has "$sysconf/echoline/$f"
done
[ ! -e "$stage$sysconf/echoline/sim" ] || fail "simulator configs belong under share/, not $sysconf/echoline/sim"
[ ! -e "$stage$sysconf/echoline/packaging" ] || fail "config/packaging/ holds install templates, not station config: $sysconf/echoline/packaging"

unit="$stage$prefix/lib/systemd/system/echolined.service"
grep -qx "ExecStart=$prefix/bin/echolined --config $sysconf/echoline/station.jsonc" "$unit" || fail "ExecStart: $(grep ^ExecStart= "$unit")"
grep -qx "ExecStopPost=$prefix/bin/echolined --config $sysconf/echoline/station.jsonc --rf-off" "$unit" || fail "ExecStopPost (RF off after every stop) missing"
grep -qx "Type=notify" "$unit" || fail "Type=notify missing"
grep -qE "^WatchdogSec=[1-9][0-9]*$" "$unit" || fail "WatchdogSec missing"
grep -qx "User=echoline" "$unit" || fail "User=echoline missing"

station="$stage$sysconf/echoline/station.jsonc"
grep -q '"data_dir": "/var/lib/echoline"' "$station" || fail "installed station: data_dir is not /var/lib/echoline"
grep -q '"unix_socket": "/run/echoline/echolined.sock"' "$station" || fail "installed station: socket is not in /run/echoline"
grep -q "^u echoline " "$stage$prefix/lib/sysusers.d/echoline.conf" || fail "sysusers.d: no user echoline"
for d in /var/lib/echoline /var/log/echoline /run/echoline; do
  grep -q "^d $d " "$stage$prefix/lib/tmpfiles.d/echoline.conf" || fail "tmpfiles.d: no $d"
done

# The installed station config, profiles and recipe load together (offline check, no daemon).
out=$("$stage$prefix/bin/echoline" recipe check "$stage$sysconf/echoline/recipes/whip915.jsonc" --station "$station" 2>&1) ||
  fail "installed station config does not load: $out"

v1=$("$stage$prefix/bin/echolined" --version | cut -d' ' -f2-)
v2=$("$stage$prefix/bin/echoline" --version | cut -d' ' -f2-)
v3=$("$stage$prefix/bin/echoline-sim" --version | cut -d' ' -f2-)
[ "$v1" = "$v2" ] && [ "$v2" = "$v3" ] || fail "versions differ: '$v1' '$v2' '$v3'"

for p in echolined echoline echoline-sim; do
  page=$(gzip -dc "$stage$prefix/share/man/man1/$p.1.gz")
  grep -q "^\.TH \"${p^^}\" 1" <<<"$page" || fail "$p.1: no title line"
  grep -q -- "--help" <<<"$page" || fail "$p.1: not made from --help"
done
gzip -dc "$stage$prefix/share/man/man1/echoline.1.gz" | grep -q '^\.SS "echoline station"' || fail "echoline.1: no station section"

if [ "$failures" -gt 0 ]; then echo "$failures install check(s) failed" >&2; exit 1; fi
echo "install layout ok ($(find "$stage" -type f | wc -l) files)"
