#!/usr/bin/env bash
# Runs one fuzz target for a fixed time, its corpus seeded from the test
# inputs, and prints libFuzzer's final figures (runs, executions per second).
#   bash fuzz/run.sh TARGET [SECONDS]     targets: ics trade_csv calendar_csv zone_spec time_text
# Needs cargo-fuzz (`cargo install cargo-fuzz`); the stable toolchain is
# enough with RUSTC_BOOTSTRAP=1, which this script sets.
set -euo pipefail
target=${1:?target}
secs=${2:-600}
here=$(cd "$(dirname "$0")" && pwd)
root=$(dirname "$here")
corpus="$here/corpus/$target"
mkdir -p "$corpus" "$here/artifacts/$target"
seed() { for f in "$@"; do [ -f "$f" ] && cp -n "$f" "$corpus/" || true; done; }
case "$target" in
  ics) seed "$root"/calendars/*.ics "$root"/tests/bad_inputs/*.ics "$root"/tests/fixtures/ics-corpus/*.ics ;;
  trade_csv) head -40 "$root/demo/trades.csv" > "$corpus/demo-head.csv"; seed "$root"/tests/bad_inputs/trades-*.csv ;;
  calendar_csv) head -40 "$root/calendars/demo-eur.csv" > "$corpus/demo-eur-head.csv"; seed "$root"/tests/bad_inputs/calendar-*.csv ;;
  zone_spec | time_text) seed "$here/seeds/$target"/* ;;
  *) echo "unknown target $target" >&2; exit 2 ;;
esac
export RUSTC_BOOTSTRAP=1
export EVENTFENCE_FUZZ_DIR=${EVENTFENCE_FUZZ_DIR:-/dev/shm}
cd "$here/.."
cargo fuzz build -s none -a "$target"   # fails loudly on a build error
# No sanitizer: the code under test is safe Rust; panics, overflow checks
# (debug assertions on) and hangs are what we look for. -timeout flags hangs.
cargo fuzz run -s none -a "$target" "$corpus" -- \
  -max_total_time="$secs" -timeout=10 -rss_limit_mb=4096 -max_len=65536 \
  -artifact_prefix="$here/artifacts/$target/" -print_final_stats=1 > "$here/artifacts/$target.log" 2>&1 || status=$?
grep -E '^(Done|stat::average_exec|stat::number_of_executed|stat::new_units|stat::peak_rss)|panicked|SUMMARY|Test unit written' "$here/artifacts/$target.log" || true
if [ -n "${status:-}" ] || ls "$here/artifacts/$target" | grep -q .; then
  echo "$target: findings or failure (exit ${status:-0}); see fuzz/artifacts/$target.log"; exit 1
fi
echo "$target: no findings"
