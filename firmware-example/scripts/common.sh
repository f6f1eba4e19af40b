# Shared by the firmware-example scripts: paths and the QEMU command line.
# Sourced, not run.
REPO="$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)"
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$REPO/target}"
M4_TARGET=thumbv7em-none-eabihf
M0_TARGET=thumbv6m-none-eabi
M4_ELF="$CARGO_TARGET_DIR/$M4_TARGET/release/heatbound-mps2-an386"
M0_ELF="$CARGO_TARGET_DIR/$M0_TARGET/release/heatbound-microbit"
HOST_BIN="$CARGO_TARGET_DIR/debug/heatbound"
# -display none -monitor none: -nographic would print the monitor banner on stdout.
QEMU_M4=(qemu-system-arm -M mps2-an386 -cpu cortex-m4 -display none -monitor none
    -semihosting-config enable=on,target=native)
QEMU_M0=(qemu-system-arm -M microbit -display none -monitor none
    -semihosting-config enable=on,target=native)

need() {
    command -v "$1" >/dev/null 2>&1 || {
        echo "error: '$1' not found (${2:-install it})" >&2
        exit 2
    }
}

# build_m4 [extra cargo features...]: the release firmware for mps2-an386.
build_m4() {
    local features="bare-metal"
    for f in "$@"; do features="$features,$f"; done
    (cd "$REPO" && cargo build -q -p heatbound-firmware-example --release \
        --target "$M4_TARGET" --features "$features" --bin heatbound-mps2-an386)
}

build_host() {
    (cd "$REPO" && cargo build -q -p heatbound-host)
}
