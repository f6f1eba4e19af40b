#!/usr/bin/env bash
# Live run: the firmware in QEMU mps2-an386 serves UART0 on a TCP socket and
# `heatbound watch --tcp` reads it, printing a line per frame.
#
# Usage: firmware-example/scripts/run-emulator.sh [--serve] [--fast] [-- WATCH-ARGS...]
#   default  `endless` build paced to real time (10 Hz), HEATBOUND_SPEEDUP×
#            faster if set (e.g. HEATBOUND_SPEEDUP=30); Ctrl-C ends both.
#   --fast   the bounded build: 600 s of rig time as fast as QEMU runs.
#   --serve  QEMU only, no watch: UART0 becomes a TCP server on a free
#            loopback port (PORT if set), for a host that reads frames and
#            writes commands. Prints `127.0.0.1:PORT` on stdout once QEMU
#            listens; runs until QEMU ends (Ctrl-C, or the bounded run's end
#            with --fast). The firmware runs whether or not a client is
#            connected (wait=off): frames sent while none is are dropped, so
#            a client sends a Hello request (counter 0, no tag) to learn the
#            rig id and session. One client at a time; the next may connect
#            when it leaves. The firmware holds the public demo key.
# Environment: HEATBOUND_SCENARIO (default thermocouple-drift), HEATBOUND_SEED,
#   HEATBOUND_SPEEDUP, HEATBOUND_DURATION_S (--fast), PORT (default 5555, or
#   a free one with --serve), DB (default heatbound-emulator.db).
set -euo pipefail
source "$(dirname "$0")/common.sh"
need qemu-system-arm "apt-get install qemu-system-arm"

fast=0
serve=0
while [ $# -gt 0 ]; do
    case "$1" in
    --fast) fast=1; shift ;;
    --serve) serve=1; shift ;;
    --) shift; break ;;
    *) break ;;
    esac
done
DB="${DB:-heatbound-emulator.db}"

if [ "$fast" = 1 ]; then build_m4; else build_m4 endless; fi

qemu_pid=""
cleanup() {
    if [ -n "$qemu_pid" ] && kill -0 "$qemu_pid" 2>/dev/null; then
        kill "$qemu_pid" 2>/dev/null || true
        wait "$qemu_pid" 2>/dev/null || true
    fi
}
trap cleanup EXIT INT TERM

if [ "$serve" = 1 ]; then
    [ $# -eq 0 ] || { echo "error: --serve runs no watch, so it takes no watch arguments: $*" >&2; exit 2; }
    need python3
    # free_port and listening (common.sh): a port taken before QEMU binds
    # it is retried with a new one.
    for _ in 1 2 3 4 5; do
        port="${PORT:-$(free_port)}"
        "${QEMU_M4[@]}" -chardev "socket,id=u0,host=127.0.0.1,port=$port,server=on,wait=off" \
            -serial chardev:u0 -kernel "$M4_ELF" </dev/null &
        qemu_pid=$!
        for _ in $(seq 50); do
            listening "$port" && break
            kill -0 "$qemu_pid" 2>/dev/null || break
            sleep 0.1
        done
        if listening "$port"; then
            echo "QEMU (pid $qemu_pid) serving UART0 on 127.0.0.1:$port (wait=off); Ctrl-C ends it" >&2
            echo "127.0.0.1:$port"
            status=0
            wait "$qemu_pid" || status=$?
            exit "$status"
        fi
        # QEMU did not come up (its error is above): most likely the port
        # was taken meanwhile. A port given in PORT is not replaced.
        cleanup
        [ -z "${PORT:-}" ] || break
    done
    echo "error: QEMU did not listen on 127.0.0.1:$port" >&2
    exit 1
fi

PORT="${PORT:-5555}"
build_host
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
