#!/usr/bin/env bash
# Instructions per sample of Monitor::push + AlarmSet::update (DESIGN.md §6:
# ≤ 1,000 x86-64 instructions per sample, the same at N = 16 and N = 1024).
#
# Usage, from the workspace root:  bench/callgrind.sh [samples]
# Needs valgrind. Counts only instructions inside `push_and_alarm`, over every
# call (the 5,000 warm-up calls included), so Ir is divided by samples + 5,000.
set -euo pipefail
cd "$(dirname "$0")/.."
SAMPLES="${1:-100000}"
BUDGET=1000
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-target}"
cargo build --release -p heatbound --example bench_push
BIN="$CARGO_TARGET_DIR/release/examples/bench_push"
OUT="$(mktemp -d)"
status=0
for N in 16 1024; do
    valgrind --tool=callgrind --toggle-collect='*push_and_alarm*' \
        --callgrind-out-file="$OUT/callgrind.$N" "$BIN" "$N" "$SAMPLES" >"$OUT/log.$N" 2>&1
    # Total Ir collected inside push_and_alarm (and everything it calls).
    IR=$(awk '/^(summary|totals):/ { print $2; exit }' "$OUT/callgrind.$N")
    # Warm-up calls are counted too: divide by every call.
    CALLS=$((SAMPLES + 5000))
    PER=$(awk -v ir="$IR" -v n="$CALLS" 'BEGIN { printf "%.1f", ir / n }')
    if awk -v p="$PER" -v b="$BUDGET" 'BEGIN { exit !(p <= b) }'; then verdict=PASS; else verdict=FAIL; status=1; fi
    echo "N = $N: $IR instructions / $CALLS samples = $PER instructions/sample (budget $BUDGET): $verdict"
done
echo "callgrind outputs: $OUT (callgrind_annotate --inclusive=yes $OUT/callgrind.16)"
exit $status
