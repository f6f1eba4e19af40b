#!/usr/bin/env bash
# Source-level profile of Monitor::push + AlarmSet::update in QEMU: which
# lines (and, on the Cortex-M0, which soft-float calls) the per-sample
# instructions go to. A tool for working on the budgets of measure.sh; its
# counts are per call, warm-up included, on both of measure's streams.
#
# Usage: firmware-example/scripts/profile.sh [m4|m0] [samples]   (default m4 600)
# Needs qemu-system-arm, binutils-arm-none-eabi and python3.
set -euo pipefail
source "$(dirname "$0")/common.sh"
need qemu-system-arm "apt-get install qemu-system-arm"
need arm-none-eabi-addr2line "apt-get install binutils-arm-none-eabi"
need python3

CORE="${1:-m4}"
SAMPLES="${2:-600}"
export HEATBOUND_MEASURE_SAMPLES="$SAMPLES"
case "$CORE" in
    m4) build_m4 measure; ELF="$M4_ELF"; QEMU=("${QEMU_M4[@]}" -serial null) ;;
    m0) build_m0
        ELF="$M0_ELF"; QEMU=("${QEMU_M0[@]}") ;;
    *) echo "usage: $0 [m4|m0] [samples]" >&2; exit 2 ;;
esac

OUT="$(mktemp -d)"
trap 'rm -rf "$OUT"' EXIT
mkfifo "$OUT/log"
# Two streams (the rig and the synthetic one), each with 100 warm-up samples.
CALLS=$((2 * (100 + SAMPLES)))
python3 "$(dirname "$0")/profile.py" "$ELF" "$OUT/log" "$CALLS" &
timeout 1200 "${QEMU[@]}" -d in_asm,exec,nochain -D "$OUT/log" -kernel "$ELF" >/dev/null 2>&1
wait
