#!/usr/bin/env bash
# End-to-end test in the emulator, in two parts:
#
# 1. recorded: the firmware (profile `firmware`, thermocouple-drift, 600 s
#    of rig time) boots in QEMU mps2-an386, UART0 goes to a file,
#    `heatbound watch` logs it, and the test asserts that beyond_carnot was
#    raised and that `heatbound audit` finds the record trustworthy;
# 2. live, both directions (emulator-live-test.sh): the endless build over
#    TCP with `heatbound watch` holding the link; acknowledge, configure, a
#    forged and a replayed command, audit. About 45 s at its default
#    HEATBOUND_SPEEDUP of 15.
#
# Usage: firmware-example/scripts/emulator-test.sh [--recorded-only]
set -euo pipefail
source "$(dirname "$0")/common.sh"
need qemu-system-arm "apt-get install qemu-system-arm"

recorded_only=0
[ "${1:-}" != --recorded-only ] || recorded_only=1

WORK="$(mktemp -d)"
trap 'rm -rf "$WORK"' EXIT

echo "==> build: firmware (profile $PROFILE, $M4_TARGET) and host tool"
HEATBOUND_SCENARIO=thermocouple-drift HEATBOUND_DURATION_S=600 build_m4
build_host

echo "==> boot in QEMU (UART0 -> uart.bin)"
timeout 120 "${QEMU_M4[@]}" -serial "file:$WORK/uart.bin" -kernel "$M4_ELF" 2>"$WORK/semihosting.txt" </dev/null
cat "$WORK/semihosting.txt"
[ -s "$WORK/uart.bin" ] || { echo "FAIL: no bytes on UART0" >&2; exit 1; }
echo "UART0: $(wc -c <"$WORK/uart.bin") bytes"

echo "==> heatbound watch --input uart.bin"
"$HOST_BIN" watch --input "$WORK/uart.bin" --db "$WORK/log.db" >"$WORK/watch.txt" 2>"$WORK/watch.err"
grep -E '^(hello|raised|run )' "$WORK/watch.txt" | head -20

if command -v sqlite3 >/dev/null 2>&1; then
    raised=$(sqlite3 "$WORK/log.db" \
        "SELECT COUNT(*) FROM events WHERE rule='beyond_carnot' AND kind='raised'")
else
    raised=$(grep -c 'raised beyond_carnot' "$WORK/watch.txt" || true)
fi
[ "$raised" -ge 1 ] || { echo "FAIL: beyond_carnot was not raised" >&2; exit 1; }
echo "beyond_carnot raised: $raised"
grep -q 'beyond_carnot_active=true' "$WORK/semihosting.txt" ||
    { echo "FAIL: the firmware does not report beyond_carnot active at the end" >&2; exit 1; }

echo "==> heatbound audit"
"$HOST_BIN" audit "$WORK/log.db" | grep -E '^(integrity|recomputation|second law|alarm consistency|verdict)'
echo "PASS: emulator test, recorded"
[ "$recorded_only" = 0 ] || exit 0

echo "==> live: QEMU <-> TCP <-> heatbound watch, with commands"
bash "$(dirname "$0")/emulator-live-test.sh"
echo "PASS: emulator test, recorded and live"
