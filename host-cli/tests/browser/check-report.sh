#!/usr/bin/env bash
# Browser check of the HTML report: Debian's chromium loads each report headless from a
# file, takes a screenshot, and the check fails when the page logged anything to the
# console (the page has no scripts, so any console message is a fault: a blocked resource,
# a parse error) or when the screenshot is blank (pixel variance of the grey image).
#
# Usage: host-cli/tests/browser/check-report.sh [ARTIFACT_DIR]
#   ARTIFACT_DIR defaults to target/browser-check; screenshots and chromium logs stay there.
# Needs: /usr/bin/chromium (apt-get install chromium), python3 with Pillow
# (host-cli/tests/browser/requirements.txt).
set -euo pipefail
cd "$(dirname "$0")/../../.."
root=$(pwd)
out=${1:-target/browser-check}
mkdir -p "$out"
out=$(cd "$out" && pwd)
chromium=${CHROMIUM:-/usr/bin/chromium}
[ -x "$chromium" ] || { echo "check-report: $chromium not found (apt-get install chromium)" >&2; exit 2; }

cargo build --release -q -p steadycal-cli --bin steadycal
bin="$root/target/release/steadycal"

"$bin" replay simulated-feeds/gas-cell.csv -q --report "$out/gas-cell.html"
"$bin" assess simulated-feeds/lab/co_gas_cell.csv --out /dev/null --report "$out/lab-co-gas-cell.html"
"$bin" replay simulated-feeds/pressure-stuck.csv -q --config simulated-feeds/pressure-stuck.monitor.toml \
  --report "$out/pressure-stuck.html"
# A page that must log a console error: proves the console capture works.
printf '<!DOCTYPE html><html><body><p>probe</p><script>undefinedProbeFunction();</script></body></html>\n' \
  > "$out/console-probe.html"

# load PAGE PNG LOG: headless load with a screenshot, chromium's log (console included) in LOG.
load() {
  local profile
  profile=$(mktemp -d)
  timeout 120 "$chromium" --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
    --disable-background-networking --disable-component-update --disable-sync \
    --user-data-dir="$profile" --enable-logging=stderr --v=0 \
    --screenshot="$2" --window-size=1280,2000 "file://$1" > "$3" 2>&1 || {
      echo "check-report: chromium failed on $1 (log: $3)" >&2; rm -rf "$profile"; return 1; }
  rm -rf "$profile"
}

console_messages() { grep -E 'CONSOLE' "$1" || true; }

load "$out/console-probe.html" "$out/console-probe.png" "$out/console-probe.log"
if [ -z "$(console_messages "$out/console-probe.log")" ]; then
  echo "check-report: the console probe logged nothing: console errors would go unseen (log: $out/console-probe.log)" >&2
  exit 1
fi

# A blank page must fail the pixel check: proves the blank-screenshot check works.
printf '<!DOCTYPE html><html><body></body></html>\n' > "$out/blank-probe.html"
load "$out/blank-probe.html" "$out/blank-probe.png" "$out/blank-probe.log"
if python3 host-cli/tests/browser/pixel_variance.py "$out/blank-probe.png" > /dev/null; then
  echo "check-report: the blank probe passed the pixel check: blank screenshots would go unseen" >&2
  exit 1
fi

status=0
for name in gas-cell lab-co-gas-cell pressure-stuck; do
  page="$out/$name.html"
  png="$out/$name.png"
  log="$out/$name.chromium.log"
  load "$page" "$png" "$log"
  messages=$(console_messages "$log")
  if [ -n "$messages" ]; then
    echo "check-report: $name: console messages:" >&2
    echo "$messages" >&2
    status=1
  fi
  if ! python3 host-cli/tests/browser/pixel_variance.py "$png"; then
    status=1
  fi
  echo "check-report: $name: $(wc -c < "$page") bytes of HTML, no console messages: $([ -z "$messages" ] && echo yes || echo NO)"
  echo "check-report: screenshot: $png"
done
if [ "$status" -eq 0 ]; then
  echo "check-report: 3 passed, 0 failed"
else
  echo "check-report: FAILED (artifacts in $out)" >&2
fi
exit "$status"
