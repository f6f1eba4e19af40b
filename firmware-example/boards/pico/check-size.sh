#!/usr/bin/env bash
# Checks the Pico image against the firmware budget: at most 64 KiB of
# flash and 16 KiB of static RAM (the same budget as
# firmware-example/scripts/size-report.sh). Prints the sections either way.
#
#   flash      = .boot2 + .vector_table + .text + .rodata + .data (its initial values)
#   static RAM = .data + .bss + .uninit (the stack comes on top, from the rest of the 264 KiB)
#
# Usage: check-size.sh [ELF]   exit 1 when over budget
#   default ELF: the release build, ${CARGO_TARGET_DIR:-./target}/thumbv6m-none-eabi/release/heatbound-pico
# Needs: readelf (binutils).
set -euo pipefail

here="$(cd "$(dirname "$0")" && pwd)"
elf="${1:-${CARGO_TARGET_DIR:-$here/target}/thumbv6m-none-eabi/release/heatbound-pico}"
FLASH_BUDGET=$((64 * 1024))
RAM_BUDGET=$((16 * 1024))

command -v readelf >/dev/null 2>&1 || { echo "check-size: readelf not found (apt-get install binutils)" >&2; exit 2; }
[ -f "$elf" ] || { echo "check-size: no ELF at $elf (run 'cargo build --release' first)" >&2; exit 2; }

# Size of a section in bytes, 0 when absent.
sec() {
    local hex
    hex="$(readelf -S -W "$elf" | sed -n 's/^ *\[ *[0-9]*\] *//p' | awk -v s="$1" '$1 == s { print $5 }')"
    echo "$((16#${hex:-0}))"
}

boot2=$(sec .boot2); vt=$(sec .vector_table); text=$(sec .text); rodata=$(sec .rodata)
data=$(sec .data); bss=$(sec .bss); uninit=$(sec .uninit)
flash=$((boot2 + vt + text + rodata + data))
ram=$((data + bss + uninit))

printf '%-14s %8s\n' section bytes
for s in .boot2 .vector_table .text .rodata .data .bss .uninit; do printf '%-14s %8s\n' "$s" "$(sec "$s")"; done
status=0
verdict() { if [ "$1" -le "$2" ]; then echo PASS; else echo FAIL; fi; }
printf '%-12s %8s of %8s  %s\n' flash "$flash" "$FLASH_BUDGET" "$(verdict "$flash" "$FLASH_BUDGET")"
printf '%-12s %8s of %8s  %s\n' "static RAM" "$ram" "$RAM_BUDGET" "$(verdict "$ram" "$RAM_BUDGET")"
[ "$flash" -le "$FLASH_BUDGET" ] || status=1
[ "$ram" -le "$RAM_BUDGET" ] || status=1
exit "$status"
