#!/usr/bin/env bash
# Live run: the firmware in QEMU mps2-an386 serves UART0 on a TCP socket and
# `heatbound watch --tcp` reads it, printing a line per frame.
#
# Usage: firmware-example/scripts/run-emulator.sh [--fast] [-- WATCH-ARGS...]
#   default  `endless` build paced to real time (10 Hz), HEATBOUND_SPEEDUP×
#            faster if set (e.g. HEATBOUND_SPEEDUP=30); Ctrl-C ends both.
#   --fast   the bounded build: 600 s of rig time as fast as QEMU runs.
# Environment: HEATBOUND_SCENARIO (default thermocouple-drift), HEATBOUND_SEED,
#   HEATBOUND_SPEEDUP, PORT (default 5555), DB (default heatbound-emulator.db).
set -euo pipefail
source "$(dirname "$0")/common.sh"
need qemu-system-arm "apt-get install qemu-system-arm"

fast=0
if [ "${1:-}" = "--fast" ]; then fast=1; shift; fi
if [ "${1:-}" = "--" ]; then shift; fi
PORT="${PORT:-5555}"
DB="${DB:-heatbound-emulator.db}"

if [ "$fast" = 1 ]; then build_m4; else build_m4 endless; fi
build_host

qemu_pid=""
cleanup() {
    if [ -n "$qemu_pid" ] && kill -0 "$qemu_pid" 2>/dev/null; then
        kill "$qemu_pid" 2>/dev/null || true
        wait "$qemu_pid" 2>/dev/null || true
    fi
}
trap cleanup EXIT INT TERM

# wait=on: QEMU does not start the CPU until the reader has connected, so
# the Hello is not lost.
"${QEMU_M4[@]}" -chardev "socket,id=u0,host=127.0.0.1,port=$PORT,server=on,wait=on" \
    -serial chardev:u0 -kernel "$M4_ELF" </dev/null &
qemu_pid=$!
# No probe connection: QEMU serves one client and would start for it. watch
# retries its connect with backoff until QEMU listens.
sleep 1
echo "QEMU (pid $qemu_pid) serving UART0 on 127.0.0.1:$PORT; logging to $DB" >&2
if [ "$fast" = 1 ]; then
    # The bounded run ends QEMU, and watch would reconnect forever: stop it
    # after the 600 summaries.
    set -- --max-summaries 600 "$@"
fi
"$HOST_BIN" watch --tcp "127.0.0.1:$PORT" --db "$DB" "$@"
