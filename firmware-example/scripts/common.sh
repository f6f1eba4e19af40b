# Shared by the firmware-example scripts: paths and the QEMU command line.
# Sourced, not run.
REPO="$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)"
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-$REPO/target}"
M4_TARGET=thumbv7em-none-eabihf
M0_TARGET=thumbv6m-none-eabi
# Every QEMU image is built with the `firmware` profile (the root
# Cargo.toml: release, with core for size too).
PROFILE=firmware
M4_ELF="$CARGO_TARGET_DIR/$M4_TARGET/$PROFILE/heatbound-mps2-an386"
M0_ELF="$CARGO_TARGET_DIR/$M0_TARGET/$PROFILE/heatbound-microbit"
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

# rustflags_warning: an exported RUSTFLAGS (or CARGO_ENCODED_RUSTFLAGS)
# replaces the rustflags of .cargo/config.toml, and with them the compact
# SHA-256 the 64 KiB flash budget counts on.
rustflags_warning() {
    if [ -n "${RUSTFLAGS:-}${CARGO_ENCODED_RUSTFLAGS:-}" ]; then
        echo "warning: RUSTFLAGS is set: it replaces .cargo/config.toml's rustflags (--cfg sha2_backend_soft=\"compact\"), so the image is larger than CI's" >&2
    fi
}

# build_m4 [extra cargo features...]: the firmware for mps2-an386.
build_m4() {
    rustflags_warning
    local features="bare-metal"
    for f in "$@"; do features="$features,$f"; done
    (cd "$REPO" && cargo build -q -p heatbound-firmware-example --profile "$PROFILE" \
        --target "$M4_TARGET" --features "$features" --bin heatbound-mps2-an386)
}

# build_m0: the measuring firmware for microbit (it has no other mode).
build_m0() {
    rustflags_warning
    (cd "$REPO" && cargo build -q -p heatbound-firmware-example --profile "$PROFILE" \
        --target "$M0_TARGET" --features bare-metal --bin heatbound-microbit)
}

# free_port: a free TCP port on 127.0.0.1, asked of the kernel. Another
# process may take it before QEMU binds it: callers retry with a new one.
free_port() {
    python3 -c 'import socket; s = socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1])'
}

# listening PORT: whether a TCP listener is on 127.0.0.1:PORT (read from
# /proc/net/tcp, so no probe connection: QEMU serves one client, and a
# wait=on QEMU would start its CPU for the probe).
listening() {
    python3 - "$1" <<'PY'
import sys
want = "0100007F:%04X" % int(sys.argv[1])  # /proc/net/tcp: little-endian 127.0.0.1, hex port
with open("/proc/net/tcp") as f:
    sys.exit(0 if any(l.split()[1] == want and l.split()[3] == "0A" for l in list(f)[1:]) else 1)
PY
}

build_host() {
    (cd "$REPO" && cargo build -q -p heatbound-host)
}
