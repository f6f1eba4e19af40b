#!/usr/bin/env bash
# Runs the unit tests of the board crate's pure modules on the host.
#
# The crate builds for thumbv6m-none-eabi only (embassy-rp does not build
# for a PC), so `cargo test` cannot run them. clock.rs and button.rs use
# nothing but `core`, so each is compiled here as a test crate of its own
# with plain rustc.
#
# Usage: host-test.sh   exit 1 when a test fails
set -euo pipefail

here="$(cd "$(dirname "$0")" && pwd)"
out="$(mktemp -d)"
trap 'rm -rf "$out"' EXIT

for module in clock button; do
    echo "== src/$module.rs"
    rustc --edition 2024 --test -D warnings --crate-name "pico_$module" \
        -o "$out/$module" "$here/src/$module.rs"
    "$out/$module"
done
