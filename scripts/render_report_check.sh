#!/usr/bin/env bash
# Render an orbweigh HTML report in headless Chromium (Debian package 'chromium'), save a
# screenshot and fail when the page logs console messages or fails to load.
#
# Usage: scripts/render_report_check.sh [RESULT.json] [SCREENSHOT.png]
#   Without RESULT.json the invented pair of tests/report_fixtures.py is used.
#   Default screenshot: ./report_screenshot.png (keep it out of git).
set -euo pipefail
here="$(cd "$(dirname "$0")/.." && pwd)"
python="${PYTHON:-python3}"
shot="$(realpath -m "${2:-report_screenshot.png}")"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT

if [ -n "${1:-}" ]; then
  result="$1"
else
  result="$("$python" - "$work" "$here/tests" <<'PY'
import sys
from pathlib import Path
sys.path.insert(0, sys.argv[2])
from report_fixtures import write_document
print(write_document(Path(sys.argv[1])))
PY
)"
fi
"$python" -m orbweigh.cli.main report "$result" --out "$work/report" --formats png

browser="$(command -v chromium || command -v chromium-browser)"
flags=(--headless --no-sandbox --disable-gpu --disable-quic --no-first-run
       --disable-background-networking --disable-component-update --disable-sync
       --user-data-dir="$work/profile" --enable-logging=stderr --v=0)
"$browser" "${flags[@]}" --window-size=1200,3000 --screenshot="$shot" \
  "file://$work/report/report.html" 2> "$work/chromium.log" || true
"$browser" "${flags[@]}" --dump-dom "file://$work/report/report.html" \
  > "$work/dom.html" 2>> "$work/chromium.log" || true

status=0
if grep -q "CONSOLE" "$work/chromium.log"; then
  echo "console messages from the page:"; grep "CONSOLE" "$work/chromium.log"; status=1
fi
figures=$(grep -o "<img" "$work/dom.html" | wc -l)
if ! grep -q "</html>" "$work/dom.html" || [ "$figures" -eq 0 ]; then
  echo "the page did not load (see below)"; tail -20 "$work/chromium.log"; status=1
fi
[ -s "$shot" ] || { echo "no screenshot written"; status=1; }
echo "figures in the rendered page: $figures; screenshot: $shot; exit status $status"
exit $status
