#!/usr/bin/env bash
# Instructions per sample of Monitor::push + AlarmSet::update on Cortex-M4F
# (QEMU mps2-an386) and Cortex-M0 (QEMU microbit), measured with SysTick
# under `-icount shift=0`, against DESIGN §6: ≤ 1,500 (M4F), ≤ 20,000 (M0).
# Calibrated per run on a straight line of 8,002 instructions. Also, for
# information: the cost of one authenticated command on the controller,
# accepted and refused.
#
# Usage: firmware-example/scripts/measure.sh      exit 1 on any FAIL
# Needs qemu-system-arm and the thumbv7em-none-eabihf / thumbv6m-none-eabi targets.
set -euo pipefail
source "$(dirname "$0")/common.sh"
need qemu-system-arm "apt-get install qemu-system-arm"

M4_BUDGET=1500
M0_BUDGET=20000
OUT="$(mktemp -d)"
trap 'rm -rf "$OUT"' EXIT

build_m4 measure
build_m0

timeout 120 "${QEMU_M4[@]}" -icount shift=0 -serial null -kernel "$M4_ELF" 2>"$OUT/m4.txt" >/dev/null
timeout 300 "${QEMU_M0[@]}" -icount shift=0 -kernel "$M0_ELF" 2>"$OUT/m0.txt" >/dev/null

status=0
field() { # field FILE NAME KEY: KEY=value from the `measure.NAME:` line
    sed -n "s/^measure\.$2: .*\b$3=\([0-9]*\).*/\1/p" "$1"
}
printf '%-28s %-10s %8s %8s %8s %8s  %s\n' "what" "core" "mean" "min" "max" "budget" "verdict"
for row in "m4 Cortex-M4F $M4_BUDGET" "m0 Cortex-M0 $M0_BUDGET"; do
    read -r key core budget <<<"$row"
    f="$OUT/$key.txt"
    grep -q '^measure.push_update:' "$f" || { cat "$f" >&2; echo "error: no measurement from $core" >&2; exit 2; }
    for what in push_update push_update_synthetic summary_encode summary_diagnose libm_sqrtf command_ack command_bad_mac; do
        mean=$(field "$f" "$what" mean); min=$(field "$f" "$what" min); max=$(field "$f" "$what" max)
        if [ "$what" = push_update ]; then
            if [ "$mean" -le "$budget" ]; then verdict=PASS; else verdict=FAIL; status=1; fi
            b=$budget
        else
            verdict="(info)"; b="-"
        fi
        printf '%-28s %-10s %8s %8s %8s %8s  %s\n' "$what" "$core" "$mean" "$min" "$max" "$b" "$verdict"
    done
    sed -n 's/^measure\.calibration: /  calibration: /p' "$f"
    sed -n 's/^stack\.high_water_bytes=/  stack high-water mark, bytes: /p' "$f"
done
echo "push_update = Monitor<64>::push + AlarmSet::update on 5,900 thermocouple-drift samples (seed 1) after 100 warm-up;"
echo "push_update_synthetic = the same on core/examples/bench_push.rs's stream (what bench/callgrind.sh counts on x86-64)."
echo "command_ack = Controller::receive of one sealed Acknowledge(None) (CRC, COBS, decode, HMAC-SHA-256 check, counter,"
echo "  Reply encoded), applied, 60 commands; command_bad_mac = the same sealed with another key, refused"
echo "  (failed_authentication). Both on a controller with an 8-sample window (measure.rs: COMMAND_WINDOW)."
exit $status
