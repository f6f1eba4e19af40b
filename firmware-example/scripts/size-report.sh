#!/usr/bin/env bash
# Flash and static RAM of the release firmware (thumbv7em-none-eabihf, QEMU
# mps2-an386) against DESIGN §6: ≤ 64 KiB flash, ≤ 16 KiB static RAM; and
# the stack high-water mark from a run in QEMU (stack painted at boot).
#
# Usage: firmware-example/scripts/size-report.sh [ELF]    exit 1 when over budget
set -euo pipefail
source "$(dirname "$0")/common.sh"
need arm-none-eabi-size "apt-get install binutils-arm-none-eabi"

FLASH_BUDGET=$((64 * 1024))
RAM_BUDGET=$((16 * 1024))
ELF="${1:-}"
if [ -z "$ELF" ]; then
    build_m4
    ELF="$M4_ELF"
fi

# `size -A`: one "section size addr" line per section.
sec() { arm-none-eabi-size -A "$ELF" | awk -v s="$1" '$1 == s { print $2; f = 1 } END { if (!f) print 0 }'; }
vt=$(sec .vector_table); text=$(sec .text); rodata=$(sec .rodata); data=$(sec .data)
bss=$(sec .bss); uninit=$(sec .uninit)
flash=$((vt + text + rodata + data))
ram=$((data + bss + uninit))

status=0
flash_verdict=PASS; ram_verdict=PASS
[ "$flash" -le "$FLASH_BUDGET" ] || { flash_verdict=FAIL; status=1; }
[ "$ram" -le "$RAM_BUDGET" ] || { ram_verdict=FAIL; status=1; }
printf '%-12s %8s\n' section bytes
for s in .vector_table .text .rodata .data .bss .uninit; do printf '%-12s %8s\n' "$s" "$(sec "$s")"; done
echo
printf '%-30s %8s %8s  %s\n' what bytes budget verdict
printf '%-30s %8s %8s  %s\n' "flash (vt+text+rodata+data)" "$flash" "$FLASH_BUDGET" "$flash_verdict"
printf '%-30s %8s %8s  %s\n' "static RAM (data+bss+uninit)" "$ram" "$RAM_BUDGET" "$ram_verdict"

if command -v qemu-system-arm >/dev/null 2>&1; then
    err="$(mktemp)"
    if timeout 120 "${QEMU_M4[@]}" -serial null -kernel "$ELF" 2>"$err" >/dev/null; then
        hw=$(sed -n 's/^stack\.high_water_bytes=//p' "$err")
        printf '%-30s %8s %8s  %s\n' "stack high-water mark" "${hw:-?}" "-" "(painted stack, one run in QEMU)"
    else
        echo "warning: the QEMU run for the stack estimate failed:" >&2
        cat "$err" >&2
    fi
    rm -f "$err"
fi
if [ "$status" -ne 0 ]; then
    echo "largest symbols:"
    arm-none-eabi-nm --size-sort -S -C "$ELF" | tail -15
fi
exit $status
