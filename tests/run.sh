#!/usr/bin/env bash
# Install what the tests need (if missing) and run every test. This is the project's one test
# command; .ci/run calls it. Works on a fresh Debian/Ubuntu machine with Rust installed.
set -euo pipefail
cd "$(dirname "$0")/.."

need=()
command -v mosquitto >/dev/null 2>&1 || [ -x /usr/sbin/mosquitto ] || need+=(mosquitto)
command -v mosquitto_sub >/dev/null 2>&1 || need+=(mosquitto-clients)
/usr/bin/python3 -c 'import aiosmtpd' >/dev/null 2>&1 || need+=(python3-aiosmtpd)
command -v openssl >/dev/null 2>&1 || need+=(openssl)
/usr/bin/python3 -c 'import scipy' >/dev/null 2>&1 || need+=(python3-scipy)
command -v victoria-metrics >/dev/null 2>&1 || [ -x /usr/bin/victoria-metrics ] || need+=(victoria-metrics)
command -v pdftotext >/dev/null 2>&1 && command -v pdftoppm >/dev/null 2>&1 || need+=(poppler-utils)
if [ ${#need[@]} -gt 0 ]; then
  echo "tests/run.sh: installing ${need[*]}"
  SUDO=""
  [ "$(id -u)" -eq 0 ] || SUDO="sudo"
  $SUDO apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $SUDO apt-get install -y -qq "${need[@]}"
fi

# Library, binary and integration tests (benches are run with `cargo bench`, not here).
log=$(mktemp)
trap 'rm -f "$log"' EXIT
set +e
cargo test "$@" 2>&1 | tee "$log"
status=${PIPESTATUS[0]}
set -e
# One closing line with the totals of every test binary.
passed=$(awk '/^test result:/ {s += $4} END {print s + 0}' "$log")
failed=$(awk '/^test result:/ {s += $6} END {print s + 0}' "$log")
echo "tests: $passed passed, $failed failed"
exit "$status"
