#!/usr/bin/env bash
# Benchmark (not a test): `eventfence rank` on 10 000 runs x 1 000 trades.
# Generates the data with the shared peer generator (../shared/peers or
# $PEERS), then prints wall time and peak memory from /usr/bin/time -v.
#
#   bash benches/rank.sh            # 10 M trades, 10 000 runs, 100 k releases
#   TRADES=1000000 RUNS=1000 bash benches/rank.sh
set -euo pipefail
cd "$(dirname "$0")/.."
PEERS=${PEERS:-../shared/peers}
TRADES=${TRADES:-10000000}
RUNS=${RUNS:-10000}
RELEASES=${RELEASES:-100000}
DATA=${DATA:-/tmp/eventfence-bench-$TRADES-$RUNS}
command -v /usr/bin/time >/dev/null || apt-get install -y time >/dev/null
python3 -c "import duckdb, pyarrow, pandas" 2>/dev/null || pip install -q -r "$PEERS/requirements.txt"
if [ ! -f "$DATA/trades.csv" ]; then
  python3 "$PEERS/gen_data.py" --trades "$TRADES" --releases "$RELEASES" --runs "$RUNS" --years 10 --seed 1 --out "$DATA"
fi
cargo build --release -q
ls -l "$DATA/trades.csv" "$DATA/calendar.csv"
/usr/bin/time -v ./target/release/eventfence rank --quiet --trades "$DATA/trades.csv" --calendar "$DATA/calendar.csv" \
  --out "$DATA/rank-out" --top 5 2> "$DATA/rank.time"
grep -E "Elapsed|Maximum resident" "$DATA/rank.time"
