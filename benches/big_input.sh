#!/usr/bin/env bash
# Benchmark (not a test): memory on a ~5 GB trade CSV. Builds the file from
# the shared generator's 10 M-trade output written 8 times (one header), then
# prints wall time and peak RSS of `check` (import only) and `analyze`, and
# shows the up-front refusal when --max-memory is below the estimate.
#
#   bash benches/big_input.sh        # needs ~6 GB of disk under /tmp
set -euo pipefail
cd "$(dirname "$0")/.."
PEERS=${PEERS:-../shared/peers}
SRC=${SRC:-/tmp/eventfence-data-10000000-100000-1000-10-1}
BIG=${BIG:-/tmp/eventfence-big}
command -v /usr/bin/time >/dev/null || apt-get install -y time >/dev/null
if [ ! -f "$SRC/trades.csv" ]; then
  python3 "$PEERS/gen_data.py" --trades 10000000 --releases 100000 --runs 1000 --years 10 --seed 1 --out "$SRC"
fi
mkdir -p "$BIG"
if [ ! -f "$BIG/trades.csv" ]; then
  head -1 "$SRC/trades.csv" > "$BIG/trades.csv"
  for _ in 1 2 3 4 5 6 7 8; do tail -n +2 "$SRC/trades.csv" >> "$BIG/trades.csv"; done
fi
cargo build --release -q
ls -l "$BIG/trades.csv"
run() {
  local name=$1; shift
  if /usr/bin/time -v "$@" > /dev/null 2> "$BIG/$name.time"; then status=ok; else status="exit $?"; fi
  printf '%-30s %s, %s s, peak RSS %s MiB\n' "$name" "$status" \
    "$(grep Elapsed "$BIG/$name.time" | awk '{print $NF}')" \
    "$(( $(grep 'Maximum resident' "$BIG/$name.time" | awk '{print $NF}') / 1024 ))"
}
run "check (import only)" ./target/release/eventfence check --trades "$BIG/trades.csv"
run "analyze" ./target/release/eventfence analyze --quiet --trades "$BIG/trades.csv" --calendar "$SRC/calendar.csv" \
  --placebo 0 --bootstrap 0 --json
run "analyze --max-memory 4G" ./target/release/eventfence analyze --quiet --trades "$BIG/trades.csv" \
  --calendar "$SRC/calendar.csv" --max-memory 4G --json
grep -h "need about" "$BIG/analyze --max-memory 4G.time" || true
