#!/usr/bin/env bash
# Flash and static RAM of every firmware image against DESIGN §6 (≤ 64 KiB
# flash, ≤ 16 KiB static RAM each), and what is known of their stacks:
#
#   mps2-an386 (QEMU)   profile `firmware`; its stack high-water mark is
#                       measured in a QEMU run (stack painted at boot)
#   Nucleo-F446RE       release (budgeted; its link also checks budget.x)
#                       and --features defmt (for information)
#   Pico                release (budgeted, through its check-size.sh) and
#                       --features defmt (for information); both also
#                       through check-boot2.sh (.boot2 at the start of flash)
#
# flash      = the loaded sections: vector table, code, read-only data,
#              .data's initial values (and .boot2 on the Pico)
# static RAM = .data + .bss + .uninit (the stack comes on top)
#
# The boards' stack peak needs the board: no figure is given for it, only
# the App's as measured in QEMU (the same App, over simulated devices
# instead of the HAL's).
#
# Usage: firmware-example/scripts/size-report.sh [--qemu-only] [ELF]
#   ELF          report this mps2-an386 image instead of building one (implies --qemu-only)
#   --qemu-only  the QEMU image alone (no board builds, about 1.5 min each when cold)
# Exit 1 when a budgeted image is over budget, fails to build or would not boot.
set -euo pipefail
source "$(dirname "$0")/common.sh"
need arm-none-eabi-size "apt-get install binutils-arm-none-eabi"
need arm-none-eabi-readelf "apt-get install binutils-arm-none-eabi"

FLASH_BUDGET=$((64 * 1024))
RAM_BUDGET=$((16 * 1024))
BOARDS="$REPO/firmware-example/boards"

qemu_only=0
ELF=""
for arg in "$@"; do
    case "$arg" in
    --qemu-only) qemu_only=1 ;;
    -*) echo "usage: $0 [--qemu-only] [ELF]" >&2; exit 2 ;;
    *) ELF="$arg"; qemu_only=1 ;;
    esac
done

status=0
ROWS=()  # image|flash|flash verdict|RAM|RAM verdict|stack

# alloc_sections ELF: "name type size flags" for every section loaded or
# reserved in memory (flag A), sizes in decimal.
alloc_sections() {
    local name type size flags
    arm-none-eabi-readelf -S -W "$1" | sed -n 's/^ *\[ *[0-9]*\] *//p' |
        while read -r name type _ _ size _ flags _; do
            # A section without flags has its link field here instead: no A.
            if [[ "$flags" == *A* ]]; then echo "$name $type $((16#$size)) $flags"; fi
        done
}

# measure ELF: sets FLASH (loaded sections) and RAM (writable ones) and
# prints the non-empty sections.
measure() {
    local name type size flags
    FLASH=0
    RAM=0
    while read -r name type size flags; do
        [ "$size" -gt 0 ] || continue
        printf '  %-16s %8d  %s\n' "$name" "$size" "$([[ "$flags" == *W* ]] && echo RAM || echo flash)$([ "$type" = PROGBITS ] && [[ "$flags" == *W* ]] && echo " + flash (initial values)")"
        [ "$type" != PROGBITS ] || FLASH=$((FLASH + size))
        [[ "$flags" != *W* ]] || RAM=$((RAM + size))
    done < <(alloc_sections "$1")
}

verdict() { # verdict VALUE BUDGET [info]
    if [ "${3:-}" = info ]; then
        [ "$1" -le "$2" ] && echo "(info: within)" || echo "(info: over)"
    elif [ "$1" -le "$2" ]; then
        echo PASS
    else
        echo FAIL
    fi
}

# add_row IMAGE FLASH RAM STACK [info]
add_row() {
    local fv rv
    fv=$(verdict "$2" "$FLASH_BUDGET" "${5:-}")
    rv=$(verdict "$3" "$RAM_BUDGET" "${5:-}")
    [ "$fv" != FAIL ] && [ "$rv" != FAIL ] || status=1
    ROWS+=("$1|$2|$fv|$3|$rv|$4")
}

# --- mps2-an386 in QEMU ------------------------------------------------------
if [ -z "$ELF" ]; then
    build_m4
    ELF="$M4_ELF"
fi
echo "== mps2-an386 (QEMU, Cortex-M4F): $ELF"
measure "$ELF"
app_stack="?"
if command -v qemu-system-arm >/dev/null 2>&1; then
    err="$(mktemp)"
    if timeout 120 "${QEMU_M4[@]}" -serial null -kernel "$ELF" 2>"$err" >/dev/null; then
        app_stack=$(sed -n 's/^stack\.high_water_bytes=//p' "$err")
    else
        echo "warning: the QEMU run for the stack high-water mark failed:" >&2
        cat "$err" >&2
    fi
    rm -f "$err"
fi
add_row "mps2-an386 (QEMU)" "$FLASH" "$RAM" "${app_stack:-?} measured (painted stack, one QEMU run)"
if [ "$FLASH" -gt "$FLASH_BUDGET" ] || [ "$RAM" -gt "$RAM_BUDGET" ]; then
    echo "  largest symbols:"
    arm-none-eabi-nm --size-sort -S -C "$ELF" | tail -15 | sed 's/^/    /'
fi
board_stack="not measured: needs the board (the App's: ${app_stack:-?} in QEMU)"

# --- the boards ----------------------------------------------------------------
# board_build DIR [cargo args...]: a release build in the board crate's own
# directory, target dir and rustflags: an exported RUSTFLAGS would replace
# those of its .cargo/config.toml (the compact SHA-256 that keeps it in
# budget), and CARGO_TARGET_DIR (which common.sh sets) would mix its
# artefacts with the workspace's.
board_build() {
    local dir="$1"
    shift
    (cd "$dir" && unset RUSTFLAGS CARGO_ENCODED_RUSTFLAGS CARGO_TARGET_DIR &&
        cargo build -q --release --locked "$@")
}

if [ "$qemu_only" = 0 ]; then
    nucleo_elf="$BOARDS/nucleo-f446re/target/thumbv7em-none-eabihf/release/heatbound-nucleo-f446re"
    pico_elf="$BOARDS/pico/target/thumbv6m-none-eabi/release/heatbound-pico"
    for variant in release defmt; do
        args=()
        info=""
        [ "$variant" = release ] || { args=(--features defmt); info=info; }

        echo
        echo "== Nucleo-F446RE ($variant): $nucleo_elf"
        if board_build "$BOARDS/nucleo-f446re" "${args[@]}"; then
            measure "$nucleo_elf"
            add_row "nucleo-f446re $variant" "$FLASH" "$RAM" "$board_stack" $info
        else
            echo "  FAIL: the build failed (over budget.x's budget, or an error above)"
            [ -n "$info" ] || status=1
            ROWS+=("nucleo-f446re $variant|-|build failed|-|-|-")
        fi

        echo
        echo "== Pico ($variant): $pico_elf"
        if board_build "$BOARDS/pico" "${args[@]}"; then
            measure "$pico_elf"
            # The board's own checks: budget (the verdict for the release
            # image) and the boot block's place (both images).
            check="$(bash "$BOARDS/pico/check-size.sh" "$pico_elf")" && size_ok=1 || size_ok=0
            grep -E '^(flash|static RAM) ' <<<"$check" | sed 's/^/  check-size.sh: /'
            their_flash=$(sed -n 's/^flash *\([0-9]*\) of.*/\1/p' <<<"$check")
            their_ram=$(sed -n 's/^static RAM *\([0-9]*\) of.*/\1/p' <<<"$check")
            if [ "$their_flash" != "$FLASH" ] || [ "$their_ram" != "$RAM" ]; then
                echo "  FAIL: check-size.sh counts flash $their_flash, static RAM $their_ram; this script $FLASH, $RAM"
                status=1
            fi
            if [ -z "$info" ] && [ "$size_ok" = 0 ]; then status=1; fi
            if boot2="$(bash "$BOARDS/pico/check-boot2.sh" "$pico_elf")"; then
                echo "  check-boot2.sh: ${boot2%%:*}"
            else
                echo "  check-boot2.sh: $boot2"
                status=1
            fi
            add_row "pico $variant" "$FLASH" "$RAM" "$board_stack" $info
        else
            echo "  FAIL: the build failed"
            [ -n "$info" ] || status=1
            ROWS+=("pico $variant|-|build failed|-|-|-")
        fi
    done
fi

echo
echo "budgets: flash $FLASH_BUDGET bytes, static RAM $RAM_BUDGET bytes, per image"
printf '%-26s %8s %-15s %10s %-15s  %s\n' image flash verdict "static RAM" verdict "stack peak, bytes"
for row in "${ROWS[@]}"; do
    IFS='|' read -r image flash fv ram rv stack <<<"$row"
    printf '%-26s %8s %-15s %10s %-15s  %s\n' "$image" "$flash" "$fv" "$ram" "$rv" "$stack"
done
exit "$status"
