#!/usr/bin/env bash
# Fails unless the Pico image will boot: the second-stage bootloader
# (.boot2, 256 bytes) must sit at the very start of flash, 0x10000000, and
# the vector table right after it at 0x10000100. The RP2040 boot ROM loads
# those first 256 bytes and checks their CRC; anything else there and the
# chip stays in the ROM's USB boot mode.
#
# Why a check: without `-Tlink-rp.x` (build.rs) the image still links, but
# .boot2 lands after the code (at 0x10000B60 in one such build).
#
# Usage: check-boot2.sh [ELF]
#   default ELF: the release build, ${CARGO_TARGET_DIR:-./target}/thumbv6m-none-eabi/release/heatbound-pico
# Needs: readelf (binutils).
set -euo pipefail

here="$(cd "$(dirname "$0")" && pwd)"
elf="${1:-${CARGO_TARGET_DIR:-$here/target}/thumbv6m-none-eabi/release/heatbound-pico}"

command -v readelf >/dev/null 2>&1 || { echo "check-boot2: readelf not found (apt-get install binutils)" >&2; exit 2; }
[ -f "$elf" ] || { echo "check-boot2: no ELF at $elf (run 'cargo build --release' first)" >&2; exit 2; }

# "addr size" of a section, in hex, or nothing when it is absent.
section() {
    readelf -S -W "$elf" | sed -n 's/^ *\[ *[0-9]*\] *//p' | awk -v s="$1" '$1 == s { print $3, $5 }'
}

status=0
read -r boot2_addr boot2_size <<<"$(section .boot2)" || true
read -r vt_addr _ <<<"$(section .vector_table)" || true

if [ -z "${boot2_addr:-}" ]; then
    echo "FAIL: $elf has no .boot2 section (embassy-rp boot2 feature missing?)"
    status=1
else
    if [ "$((16#$boot2_addr))" -ne "$((0x10000000))" ]; then
        echo "FAIL: .boot2 is at 0x$boot2_addr, not 0x10000000 (is -Tlink-rp.x on the link line?)"
        status=1
    fi
    if [ "$((16#$boot2_size))" -ne 256 ]; then
        echo "FAIL: .boot2 is $((16#$boot2_size)) bytes, not 256"
        status=1
    fi
fi
if [ -z "${vt_addr:-}" ] || [ "$((16#$vt_addr))" -ne "$((0x10000100))" ]; then
    echo "FAIL: .vector_table is at 0x${vt_addr:-?}, not 0x10000100 (memory.x FLASH origin?)"
    status=1
fi

if [ "$status" -eq 0 ]; then
    echo "ok: .boot2 at 0x$boot2_addr (256 bytes), .vector_table at 0x$vt_addr: $elf"
fi
exit "$status"
