#!/usr/bin/env python3
"""The log reader and control-socket client of emulator-live-test.sh: each
subcommand does one step and prints one line, exit 0 when it holds, 1 when
it does not, 2 when it could not look.

    live-check.py wait DB SQL SECONDS       until SQL (a count) is above 0 in the log
    live-check.py value DB SQL              the first column of SQL's first row
    live-check.py trip-held DB MIN          the acknowledged trip held (see trip_held)
    live-check.py hello-after DB COUNTER DIGEST RUN
                                            the next Hello after the reply to COUNTER
    live-check.py forged DB                 a command sealed with a wrong key, as hex
    live-check.py replayed DB               the applied acknowledge's sealed bytes, as hex
    live-check.py forward SOCKET HEX CODE   forward HEX, expect the reply code CODE
    live-check.py refused DB CODE           a forwarded command logged as rejected with CODE
    live-check.py qmp SOCKET COMMAND        a QMP command without arguments (stop, cont)
    live-check.py boundary FILE             FILE (QEMU's log of UART0 output) ends with
                                            a frame delimiter, 0x00

The log is read with Python's sqlite3 (no CLI needed), read-only, while
`heatbound watch` writes it (docs/log-schema.md). The wrong-key command is
built from the specification as downlink-probe.py and
tests/tools/gen_wire_golden.py build theirs (struct, zlib, hmac, PyPI `cobs`),
for the emulator's rig id and the session of its latest Hello, with a
counter above the last one it accepted. The control socket protocol is
docs/control-socket.md: one JSON line each way.
"""
import importlib.util
import json
import os
import socket
import sqlite3
import sys
import time

# No __pycache__ beside the scripts (downlink-probe.py is loaded as a module).
sys.dont_write_bytecode = True

HERE = os.path.dirname(os.path.abspath(__file__))
# Who the forwarded commands say asked (the log's commands.origin).
ORIGIN = "emulator-live-test.sh"


def probe():
    """downlink-probe.py as a module: its frame builder and constants."""
    spec = importlib.util.spec_from_file_location(
        "downlink_probe", os.path.join(HERE, "downlink-probe.py")
    )
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def rows(db, sql, args=()):
    """SQL's rows; [] while the log or its tables are not there yet."""
    try:
        con = sqlite3.connect(f"file:{db}?mode=ro", uri=True, timeout=5)
    except sqlite3.Error:
        return []
    try:
        return con.execute(sql, args).fetchall()
    except sqlite3.Error:
        return []
    finally:
        con.close()


def wait(db, sql, seconds):
    deadline = time.monotonic() + float(seconds)
    while time.monotonic() < deadline:
        r = rows(db, sql)
        if r and r[0][0] and r[0][0] > 0:
            return 0
        time.sleep(0.2)
    print(f"FAIL: nothing within {seconds} s: {sql}")
    return 1


def value(db, sql):
    r = rows(db, sql)
    if not r:
        print(f"FAIL: no row: {sql}")
        return 1
    print(r[0][0])
    return 0


def trip_held(db, at_least):
    """The summaries after beyond_carnot's acknowledgement (at least
    AT_LEAST of them) all have status bit 2, trip_active: an acknowledged
    alarm whose condition still holds keeps the trip, and
    thermocouple-drift never repairs its thermocouple, so beyond_carnot is
    never cleared either."""
    ack = rows(
        db,
        "SELECT t_ms FROM events WHERE rule = 'beyond_carnot' AND kind = 'acknowledged' "
        "ORDER BY ord LIMIT 1",
    )
    if not ack:
        print("FAIL: no acknowledged event for beyond_carnot")
        return 1
    t = ack[0][0]
    after = rows(db, "SELECT t_ms, status FROM summaries WHERE t_ms > ? ORDER BY ord", (t,))
    dropped = [s for s in after if not s[1] & 4]
    cleared = rows(
        db, "SELECT t_ms FROM events WHERE rule = 'beyond_carnot' AND kind = 'cleared'"
    )
    ok = len(after) >= int(at_least) and not dropped and not cleared
    print(
        f"{'ok' if ok else 'FAIL'}: acknowledged at t = {t / 1000:.1f} s; "
        f"{len(after)} summaries since (want >= {at_least}), {len(dropped)} without "
        f"trip_active, beyond_carnot cleared {len(cleared)} times"
    )
    return 0 if ok else 1


def hello_after(db, counter, digest_hex, run_before):
    """The first Hello logged after the Reply to command COUNTER carries
    DIGEST and a run counter above RUN_BEFORE."""
    reply = rows(db, "SELECT ord, code FROM replies WHERE counter = ? ORDER BY ord", (counter,))
    if not reply:
        print(f"FAIL: no reply to command {counter}")
        return 1
    hello = rows(
        db,
        "SELECT config_digest, run_counter, ord FROM hellos WHERE ord > ? ORDER BY ord LIMIT 1",
        (reply[0][0],),
    )
    if not hello:
        print(f"FAIL: no Hello after the reply to command {counter}")
        return 1
    digest, run, _ = hello[0]
    want = int(digest_hex, 16)
    ok = digest == want and run > int(run_before)
    print(
        f"{'ok' if ok else 'FAIL'}: next Hello: config digest {digest:08x} (want {want:08x}), "
        f"run {run} (was {run_before})"
    )
    return 0 if ok else 1


def forged(db):
    """Acknowledge(None) sealed with a key that is not the demo key."""
    p = probe()
    h = rows(db, "SELECT rig_id, session, last_counter FROM hellos ORDER BY ord DESC LIMIT 1")
    if not h:
        print("FAIL: no Hello in the log", file=sys.stderr)
        return 2
    rig_id, session, last = h[0]
    rig = rig_id.encode("ascii").ljust(p.RIG_ID_LEN, b"\x00")
    counter = last + 100
    frame = p.command(counter, p.CMD_ACKNOWLEDGE_ALL, p.WRONG_KEY, rig, session)
    print(frame.hex())
    return 0


def replayed(db):
    r = rows(
        db,
        "SELECT sealed FROM commands WHERE command = 'ack' AND outcome = 'applied' "
        "ORDER BY id LIMIT 1",
    )
    if not r:
        print("FAIL: no applied acknowledge in the log", file=sys.stderr)
        return 2
    print(bytes(r[0][0]).hex())
    return 0


def forward(path, frame_hex, want):
    request = {
        "ask": "forward",
        "frame_hex": frame_hex,
        "origin": ORIGIN,
        "timeout_s": 15,
    }
    try:
        with socket.socket(socket.AF_UNIX, socket.SOCK_STREAM) as s:
            s.settimeout(30)
            s.connect(path)
            s.sendall(json.dumps(request).encode() + b"\n")
            answer = b""
            while not answer.endswith(b"\n"):
                chunk = s.recv(4096)
                if not chunk:
                    break
                answer += chunk
    except OSError as e:
        print(f"FAIL: control socket {path}: {e}")
        return 2
    try:
        a = json.loads(answer)
    except ValueError:
        print(f"FAIL: not a JSON answer: {answer!r}")
        return 1
    ok = a.get("result") == "replied" and a.get("code") == want
    print(f"{'ok' if ok else 'FAIL'}: {json.dumps(a)} (want {want})")
    return 0 if ok else 1


def refused(db, code):
    r = rows(
        db,
        "SELECT id, command, detail, counter FROM commands "
        "WHERE origin = ? AND outcome = 'rejected' AND reply_code = ? ORDER BY id",
        (ORIGIN, code),
    )
    ok = bool(r)
    print(f"{'ok' if ok else 'FAIL'}: commands rejected with {code}: {r}")
    return 0 if ok else 1


def qmp(path, command):
    """One QMP command to QEMU: the greeting, capabilities, the command."""
    try:
        with socket.socket(socket.AF_UNIX, socket.SOCK_STREAM) as s:
            s.settimeout(10)
            s.connect(path)
            f = s.makefile("rwb")

            def answer():
                # Skip asynchronous events ({"event": ...}) to the answer.
                while True:
                    line = f.readline()
                    if not line:
                        raise ConnectionError("QMP closed")
                    msg = json.loads(line)
                    if "return" in msg or "error" in msg:
                        return msg

            if "QMP" not in json.loads(f.readline()):
                raise ConnectionError("no QMP greeting")
            for execute in ("qmp_capabilities", command):
                f.write(json.dumps({"execute": execute}).encode() + b"\n")
                f.flush()
                msg = answer()
                if "error" in msg:
                    print(f"FAIL: QMP {execute}: {msg['error']}")
                    return 1
    except (OSError, ValueError) as e:
        print(f"FAIL: QMP socket {path}: {e}")
        return 2
    return 0


def boundary(path):
    with open(path, "rb") as f:
        f.seek(0, os.SEEK_END)
        if f.tell() == 0:
            return 0
        f.seek(-1, os.SEEK_END)
        return 0 if f.read(1) == b"\x00" else 1


def main(argv):
    steps = {
        "wait": (wait, 3),
        "value": (value, 2),
        "trip-held": (trip_held, 2),
        "hello-after": (hello_after, 4),
        "forged": (forged, 1),
        "replayed": (replayed, 1),
        "forward": (forward, 3),
        "refused": (refused, 2),
        "qmp": (qmp, 2),
        "boundary": (boundary, 1),
    }
    if len(argv) < 2 or argv[1] not in steps or len(argv) - 2 != steps[argv[1]][1]:
        print(__doc__, file=sys.stderr)
        return 2
    f, _ = steps[argv[1]]
    return f(*argv[2:])


if __name__ == "__main__":
    sys.exit(main(sys.argv))
