#!/usr/bin/env bash
# Opens the demo report.html headless in Chromium from a file path, takes a
# screenshot, and fails if the page logs console messages (errors) or asks
# for anything over the network. Run by .ci/run when Chromium is present.
#
#   bash tests/report_browser.sh [BINARY]
set -euo pipefail
cd "$(dirname "$0")/.."
BIN=${1:-target/debug/eventfence}
CHROME=$(command -v chromium || command -v chromium-browser || true)
if [ -z "$CHROME" ]; then echo "report_browser: chromium not installed"; exit 1; fi
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
"$BIN" analyze --quiet --trades demo/trades.csv --trades-tz America/New_York+07:00 \
  --calendar calendars/demo-usd.ics calendars/demo-eur.csv calendars/demo-gbp-jpy.ics \
  --calendar-tz Europe/Berlin --instrument-map-file demo/instruments.json \
  --placebo 99 --bootstrap 200 --out "$WORK/out" > /dev/null
# Opens one report headless; fails on console messages or page requests.
# $1: the report, $2: a name for its work files.
open_report() {
REPORT=$1
timeout 120 "$CHROME" --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
  --disable-background-networking --disable-component-update --disable-sync \
  --user-data-dir="$WORK/profile-$2" --enable-logging=stderr --v=0 \
  --log-net-log="$WORK/net-$2.json" --window-size=1100,2400 \
  --screenshot="$WORK/$2.png" "file://$REPORT" > "$WORK/chrome-$2.log" 2>&1 || true
[ -s "$WORK/$2.png" ] || { echo "no screenshot taken"; cat "$WORK/chrome-$2.log"; exit 1; }
if grep -q "CONSOLE" "$WORK/chrome-$2.log"; then
  echo "the page logged console messages:"; grep "CONSOLE" "$WORK/chrome-$2.log"; exit 1
fi
# Network: any http(s) request other than the browser's own service hosts
# (which it contacts whatever page is open) means the page loaded something.
python3 - "$WORK/net-$2.json" <<'PY'
import re, sys
urls = set(re.findall(r'"(https?://[^"\s]+)', open(sys.argv[1]).read()))
own = re.compile(r'^https?://([a-z0-9-]+\.)*(google\.com|googleapis\.com|gstatic\.com|gvt1\.com)(/|$)')
page = sorted(u for u in urls if not own.match(u))
if page:
    print("the page requested:", page)
    sys.exit(1)
PY
}

REPORT="$WORK/out/report.html"
size=$(stat -c %s "$REPORT")
[ "$size" -lt 2097152 ] || { echo "report.html is $size bytes (limit 2 MB)"; exit 1; }
# Static: nothing in the page can load a resource.
if grep -Eq '<script|<link|<img|<iframe|src=|href=|@import|url\(' "$REPORT"; then
  echo "report.html references an external resource"; exit 1
fi
open_report "$REPORT" report

# A release title holding markup (tests/fixtures/hostile): the page shows it
# as text; a script that ran would log to the console.
"$BIN" analyze --quiet --trades tests/fixtures/hostile/trades.csv --calendar tests/fixtures/hostile/calendar.csv \
  --placebo 0 --bootstrap 0 --out "$WORK/hostile" > /dev/null
HOSTILE="$WORK/hostile/report.html"
if grep -Eq '<script|<img|<iframe' "$HOSTILE"; then echo "the release title's markup reached the page unescaped"; exit 1; fi
grep -q '&lt;script&gt;console.log(&quot;ran&quot;)&lt;/script&gt; &amp; &lt;img' "$HOSTILE" || grep -q '&lt;script&gt;console.log(&#34;ran&#34;)' "$HOSTILE" || {
  echo "the release title is not shown escaped"; exit 1; }
open_report "$HOSTILE" hostile
if [ -n "${SCREENSHOT_TO:-}" ]; then cp "$WORK/report.png" "$SCREENSHOT_TO"; fi
echo "report_browser: 2 passed, 0 failed"
