#!/usr/bin/env bash
# Load benchmark for the MQTT lab path: RIGS simulated rigs, each at 10
# summaries per wall second, each through its own `heatbound watch --publish`,
# all into one mosquitto broker and one `heatbound lab` collector.
#
# Reports end-to-end latency (rig's watch -> lab log, p50 and p99, from the
# lab's closing line), the collector's CPU and peak RSS, and whether the lab
# kept up (its log holds exactly the summaries of all the rigs' logs).
# Budget: p99 < 250 ms, and the counts match. Exits non-zero otherwise.
#
# Usage, from the workspace root:  bash bench/lab-load.sh [RIGS] [SECONDS]
#   (defaults 50 and 60). KEEP=1 keeps the temp dir (logs, dbs) afterwards;
#   it is also kept, and its path printed, when a check fails.
# Needs /usr/sbin/mosquitto and python3 (sqlite3 CLI used when present).
set -euo pipefail
cd "$(dirname "$0")/.."

RIGS="${1:-50}"
SECONDS_RUN="${2:-60}"
BUDGET_P99_MS=250
SPEED=10                      # rig seconds per wall second: 10 summaries/s per rig
MOSQUITTO=/usr/sbin/mosquitto

# --- 1. Build, temp dir, cleanup -------------------------------------------
export CARGO_TARGET_DIR="${CARGO_TARGET_DIR:-target}"
cargo build --release -p heatbound-host >&2
BIN="$CARGO_TARGET_DIR/release/heatbound"

TMP="$(mktemp -d -t heatbound-lab-load.XXXXXX)"   # mode 700
mkdir -m 700 "$TMP/run"
export XDG_RUNTIME_DIR="$TMP/run"   # watch control sockets, private to us
unset HEATBOUND_KEY_FILE            # the sims and watches use the demo key
PIDS=()                             # every process we start, for the trap
KEEP_TMP="${KEEP:-0}"

cleanup() {
    local pid
    for pid in "${PIDS[@]}"; do
        kill -TERM "$pid" 2>/dev/null || true
    done
    for pid in "${PIDS[@]}"; do
        wait "$pid" 2>/dev/null || true
    done
    if [[ "$KEEP_TMP" == 1 ]]; then
        echo "lab-load: logs and dbs kept in $TMP" >&2
    else
        rm -rf "$TMP"
    fi
}
trap cleanup EXIT
trap 'exit 130' INT TERM

log() { echo "lab-load: $*" >&2; }

free_port() {
    python3 -c 'import socket;s=socket.socket();s.bind(("127.0.0.1",0));print(s.getsockname()[1])'
}

# Summaries in one SQLite log (prints "?" if it cannot be read yet).
count_summaries() {
    if command -v sqlite3 >/dev/null; then
        sqlite3 -cmd '.timeout 2000' "$1" 'SELECT count(*) FROM summaries' 2>/dev/null || echo '?'
    else
        python3 - "$1" <<'EOF' 2>/dev/null || echo '?'
import sqlite3, sys
c = sqlite3.connect(f"file:{sys.argv[1]}?mode=ro", uri=True, timeout=2)
print(c.execute("SELECT count(*) FROM summaries").fetchone()[0])
EOF
    fi
}

# CPU ticks (utime + stime) of a process, from /proc/PID/stat.
cpu_ticks() {
    # Field 2 (comm) may hold spaces: cut after the last ')'.
    local rest
    rest="$(sed 's/.*) //' "/proc/$1/stat")"
    awk '{ print $12 + $13 }' <<<"$rest"   # utime, stime = fields 14, 15
}

# Wait until FILE contains a line matching REGEX (up to 10 s).
wait_for_line() {
    local file="$1" regex="$2" i
    for i in $(seq 100); do
        grep -qE "$regex" "$file" 2>/dev/null && return 0
        sleep 0.1
    done
    log "timed out waiting for /$regex/ in $file"
    return 1
}

# --- 2. Broker and collector ------------------------------------------------
BPORT="$(free_port)"
BROKER="mqtt://127.0.0.1:$BPORT"
cat >"$TMP/mosquitto.conf" <<EOF
listener $BPORT 127.0.0.1
allow_anonymous true
persistence false
# Never drop QoS 1 messages queued for the lab while it is busy.
max_queued_messages 100000
EOF
# Plain process; stderr opened by us before it drops to user mosquitto.
"$MOSQUITTO" -c "$TMP/mosquitto.conf" >"$TMP/mosquitto.log" 2>&1 &
PIDS+=($!)
wait_for_line "$TMP/mosquitto.log" "running"

# The lab runs for at most the run plus a generous drain; we stop it ourselves.
LAB_DB="$TMP/lab.sqlite"
"$BIN" lab --broker "$BROKER" --db "$LAB_DB" --json \
    --max-duration-s $((SECONDS_RUN + 120)) >"$TMP/lab.json" 2>"$TMP/lab.err" &
LAB_PID=$!
PIDS+=("$LAB_PID")
# Wait until the lab is connected to the broker before any rig publishes.
wait_for_line "$TMP/mosquitto.log" "as heatbound-lab-"
sleep 1

CLK_TCK="$(getconf CLK_TCK)"
LAB_TICKS0="$(cpu_ticks "$LAB_PID")"
T0="$(date +%s.%N)"

# --- 3. Rigs: one simulator and one watch each ------------------------------
# Simulated time is long enough that no sim ends before its watch does.
SIM_DURATION=$(((SECONDS_RUN + 60) * SPEED))
WATCH_PIDS=()
log "starting $RIGS rigs (simulate + watch --publish) for ${SECONDS_RUN} s, broker $BROKER"
for n in $(seq -w 1 "$RIGS"); do
    "$BIN" simulate --listen 0 --speed "$SPEED" --duration-s "$SIM_DURATION" \
        --rig-id "load-$n" 2>"$TMP/sim-$n.err" &
    PIDS+=($!)
done
T_W0="$(date +%s.%N)"   # first watch starts (and its sim with it)
for n in $(seq -w 1 "$RIGS"); do
    wait_for_line "$TMP/sim-$n.err" 'listening on 127\.0\.0\.1:[0-9]+'
    addr="$(grep -oE '127\.0\.0\.1:[0-9]+' "$TMP/sim-$n.err" | head -1)"
    # --max-duration-s is a safety net only: we SIGTERM the watches ourselves.
    "$BIN" watch --tcp "$addr" --db "$TMP/rig-$n.sqlite" --publish "$BROKER" \
        --quiet --max-duration-s $((SECONDS_RUN + 60)) \
        >"$TMP/watch-$n.out" 2>"$TMP/watch-$n.err" &
    WATCH_PIDS+=($!)
    PIDS+=($!)
done
T_RIGS="$(date +%s.%N)"   # all watches started: the load runs from here

# Progress every 10 s: elapsed time and what the lab has logged so far.
elapsed=0
while ((elapsed < SECONDS_RUN)); do
    step=$((SECONDS_RUN - elapsed < 10 ? SECONDS_RUN - elapsed : 10))
    sleep "$step"
    elapsed=$((elapsed + step))
    log "${elapsed}/${SECONDS_RUN} s: lab log holds $(count_summaries "$LAB_DB") summaries"
done

# --- 4. Stop: watches first (they drain to the broker), then the lab --------
T_STOP="$(date +%s.%N)"
log "stopping the watches (they publish what is left and wait for acks)"
for pid in "${WATCH_PIDS[@]}"; do kill -TERM "$pid" 2>/dev/null || true; done
watch_failures=0
for pid in "${WATCH_PIDS[@]}"; do
    wait "$pid" || watch_failures=$((watch_failures + 1))
done
T_WATCHES_DONE="$(date +%s.%N)"
sleep 3   # let the lab take the last messages still queued at the broker

# Collector's CPU and peak RSS, read just before it is told to stop.
LAB_TICKS1="$(cpu_ticks "$LAB_PID")"
T1="$(date +%s.%N)"
LAB_HWM_KB="$(awk '/^VmHWM:/ { print $2 }' "/proc/$LAB_PID/status")"
log "stopping the lab"
kill -TERM "$LAB_PID"
lab_rc=0
wait "$LAB_PID" || lab_rc=$?

# --- 5. Checks and report ---------------------------------------------------
rig_total=0
for n in $(seq -w 1 "$RIGS"); do
    c="$(count_summaries "$TMP/rig-$n.sqlite")"
    [[ "$c" =~ ^[0-9]+$ ]] || { log "cannot count rig-$n.sqlite"; c=0; }
    rig_total=$((rig_total + c))
done
lab_total="$(count_summaries "$LAB_DB")"

closing="$(grep -E '^heatbound lab: [0-9]+ records taken' "$TMP/lab.err" | tail -1 || true)"

python3 - "$closing" "$rig_total" "$lab_total" "$RIGS" "$SECONDS_RUN" \
    "$T0" "$T_W0" "$T_RIGS" "$T_STOP" "$T_WATCHES_DONE" "$T1" \
    "$LAB_TICKS0" "$LAB_TICKS1" "$CLK_TCK" "$LAB_HWM_KB" \
    "$BUDGET_P99_MS" "$watch_failures" "$lab_rc" >"$TMP/report.txt" <<'EOF' && status=0 || status=$?
import re, sys
(closing, rig_total, lab_total, rigs, secs, t0, t_w0, t_rigs, t_stop, t_wd, t1,
 ticks0, ticks1, clk, hwm_kb, budget, watch_fail, lab_rc) = sys.argv[1:]
t0, t_w0, t_rigs, t_stop, t_wd, t1 = map(float, (t0, t_w0, t_rigs, t_stop, t_wd, t1))
rig_total, budget = int(rig_total), int(budget)
m = re.search(r"(\d+) records taken, (\d+) duplicates dropped, (\d+) recovered after "
              r"(\d+) resend requests, (\d+) holes given up, (\d+) messages refused; .*"
              r"p50 (\S+)(?: ms)?, p99 (\S+)(?: ms)? over (\d+) frames", closing)
taken = dups = recovered = resends = holes = refused = frames = None
p50 = p99 = None
if m:
    taken, dups, recovered, resends, holes, refused = map(int, m.groups()[:6])
    p50 = None if m.group(7) == "-" else int(m.group(7))
    p99 = None if m.group(8) == "-" else int(m.group(8))
    frames = int(m.group(9))
load_s = t_stop - t_rigs          # rigs all publishing
interval = t1 - t0                # collector measured from before the first rig to before SIGTERM
cpu_s = (int(ticks1) - int(ticks0)) / int(clk)
kept_up = lab_total.isdigit() and int(lab_total) == rig_total and rig_total > 0
p99_ok = p99 is not None and p99 < budget
print(f"rigs:                 {rigs} (target {int(rigs) * 10} summaries/s)")
print(f"duration:             {secs} s requested, {load_s:.1f} s with all rigs up "
      f"(watches drained in {t_wd - t_stop:.1f} s)")
print(f"summaries:            {rig_total} in rig logs, {lab_total} in lab log "
      f"= {rig_total / (t_stop - t_w0):.0f} summaries/s overall")
if m:
    print(f"lab:                  {taken} records taken, {dups} duplicates dropped, "
          f"{recovered} recovered after {resends} resend requests, {holes} holes given up, "
          f"{refused} refused")
    print(f"latency watch->lab:   p50 {p50} ms, p99 {p99} ms over {frames} frames")
else:
    print("latency watch->lab:   lab closing line not found")
print(f"collector CPU:        {cpu_s:.1f} s over {interval:.1f} s = "
      f"{100 * cpu_s / interval:.0f} % of one core")
print(f"collector peak RSS:   {int(hwm_kb) / 1024:.1f} MiB")
print(f"p99 < {budget} ms:         {'PASS' if p99_ok else 'FAIL'}")
print(f"kept up (counts match): {'yes' if kept_up else 'no'}")
if int(watch_fail) or int(lab_rc):
    print(f"exit codes:           {watch_fail} watch(es) failed, lab exit {lab_rc}")
sys.exit(0 if (p99_ok and kept_up and not int(watch_fail) and not int(lab_rc)) else 1)
EOF
cat "$TMP/report.txt"
if ((status != 0)); then
    KEEP_TMP=1
    echo "lab closing line: ${closing:-<none>}"
    echo "FAIL: logs kept in $TMP (lab.err, watch-NN.err, sim-NN.err, mosquitto.log)"
fi
exit "$status"
