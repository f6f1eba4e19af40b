#!/usr/bin/env python3
"""Checks the downlink of a controller on a TCP link by hand: the emulator
served by `run-emulator.sh --serve`, or anything else that speaks wire
protocol version 4 with the public demo key.

    firmware-example/scripts/run-emulator.sh --serve     # prints 127.0.0.1:PORT
    python3 firmware-example/scripts/downlink-probe.py 127.0.0.1:PORT

It connects, sends a Hello request and reads the Hello for the rig id, the
session and the last accepted counter, then sends an Acknowledge(None)
sealed with the demo key for that rig and session (counter: the last
accepted + 1) and expects `applied`; the same bytes again and expects
`replayed`; a fresh counter sealed with another key and expects
`failed_authentication`; and finally a Hello request whose Hello must carry
the acknowledge's counter as the last accepted one. It prints one line per
step and exits 0 when every reply was the one expected, 1 otherwise, 2 when
the link failed.

Commands are built from the specification with general-purpose libraries,
as tests/tools/gen_wire_golden.py builds its golden commands: struct, zlib
(CRC-32/ISO-HDLC), hmac + hashlib (HMAC-SHA-256) and PyPI `cobs`
(`pip install cobs==1.2.1`). Where each constant comes from is named beside
it; "spec" is the module documentation of core/src/wire/command.rs and
core/src/wire/mod.rs and docs/wire-format.md.
"""
import argparse
import hashlib
import hmac
import socket
import struct
import sys
import time
import zlib

from cobs import cobs  # PyPI cobs 1.2.1, as tests/tools/gen_wire_golden.py

# core/src/wire/format.rs: PROTOCOL_VERSION and `mod kind`.
VERSION = 4
KIND_HELLO, KIND_SUMMARY, KIND_EVENT, KIND_REPLY, KIND_COMMAND = 0, 1, 2, 3, 16
# core/src/wire/command.rs: DOMAIN, the tag's domain-separation prefix.
DOMAIN = b"heatbound command v2\x00"
# core/src/wire/command.rs: CommandKey::DEMO, the documented public demo key.
DEMO_KEY = b"heatbound demo key - not secret!"
# Any 32 bytes but the demo key's (the probe's own choice).
WRONG_KEY = bytes(range(32))
# core/src/wire/format.rs: MAC_LEN, the truncated tag's length.
MAC_LEN = 8
# core/src/wire/frames.rs: RigId::LEN, ids are NUL-padded to 16 bytes.
RIG_ID_LEN = 16
# core/src/wire/frames.rs: ReplyCode::ALL, in wire order.
REPLY_CODES = [
    "applied",
    "malformed",
    "failed_authentication",
    "replayed",
    "invalid_configuration",
    "busy",
    "no_key",
]
# core/src/wire/command.rs: enum Command, variants in declaration order
# (postcard writes the variant index as a varint); Option is 0 = None.
CMD_HELLO_REQUEST = b"\x00"
CMD_ACKNOWLEDGE_ALL = b"\x01" + b"\x00"  # Acknowledge(None)


def varint(n):
    """postcard unsigned varint (LEB128), as gen_wire_golden.py."""
    out = bytearray()
    while True:
        b = n & 0x7F
        n >>= 7
        if n:
            out.append(b | 0x80)
        else:
            out.append(b)
            return bytes(out)


def frame(payload):
    """COBS(payload ++ CRC32_LE(payload)) ++ 0x00 (spec; gen_wire_golden.py frame())."""
    crc = zlib.crc32(payload) & 0xFFFFFFFF
    return cobs.encode(payload + struct.pack("<I", crc)) + b"\x00"


def command(counter, body, key, rig_id, session):
    """A sealed command (spec; gen_wire_golden.py command()):
    payload = version, kind 16, varint counter, command;
    tag = HMAC-SHA-256(key, DOMAIN ++ rig_id (16, NUL-padded) ++ session_le32 ++ payload)[:8]."""
    payload = bytes([VERSION, KIND_COMMAND]) + varint(counter) + body
    mac = hmac.new(key, DOMAIN + rig_id + struct.pack("<I", session) + payload, hashlib.sha256)
    return frame(payload + mac.digest()[:MAC_LEN])


def hello_request():
    """Counter 0 and an all-zero tag: the one command honoured unsealed
    (gen_wire_golden.py `command_hello`)."""
    return frame(bytes([VERSION, KIND_COMMAND]) + varint(0) + CMD_HELLO_REQUEST + bytes(MAC_LEN))


class Reader:
    """Bytes from the socket, split at 0x00, COBS-decoded and CRC-checked."""

    def __init__(self, sock):
        self.sock = sock
        self.buf = b""
        self.frames = {}  # kind -> count

    def next_frame(self, deadline):
        while True:
            if b"\x00" in self.buf:
                raw, self.buf = self.buf.split(b"\x00", 1)
                if not raw:
                    continue
                try:
                    data = cobs.decode(raw)
                except cobs.DecodeError:
                    continue
                if len(data) < 6:
                    continue
                payload, crc = data[:-4], struct.unpack("<I", data[-4:])[0]
                if zlib.crc32(payload) & 0xFFFFFFFF != crc or payload[0] != VERSION:
                    continue
                self.frames[payload[1]] = self.frames.get(payload[1], 0) + 1
                return payload[1], payload[2:]
            left = deadline - time.monotonic()
            if left <= 0:
                return None
            self.sock.settimeout(left)
            try:
                chunk = self.sock.recv(4096)
            except socket.timeout:
                return None
            if not chunk:
                raise ConnectionError("the controller closed the link")
            self.buf += chunk


def take_varint(body, i):
    n, shift = 0, 0
    while True:
        b = body[i]
        i += 1
        n |= (b & 0x7F) << shift
        shift += 7
        if not b & 0x80:
            return n, i


def parse_hello(body):
    """The fields of core/src/wire/codec.rs RawHello, in order (postcard;
    gen_wire_golden.py hello()): rig_id [u8; 16], firmware_version (u8, u8,
    u8), sample_period_ms, window_samples, mode (varints), coverage_factor
    f32, ambient_k Option<f32>, 6 uncertainties f32, losses Option<(f32,
    f32)>, config_digest, run, session, last_counter (varints), commands u8
    (bit 0 = keyed)."""
    rig_id = body[:RIG_ID_LEN]
    i = RIG_ID_LEN + 3
    for _ in range(3):  # sample_period_ms, window_samples, mode
        _, i = take_varint(body, i)
    i += 4  # coverage_factor
    i += 1 + (4 if body[i] == 1 else 0)  # ambient_k
    i += 6 * 4  # uncertainties (hot2 last)
    i += 1 + (8 if body[i] == 1 else 0)  # losses
    _, i = take_varint(body, i)  # config_digest
    run, i = take_varint(body, i)
    session, i = take_varint(body, i)
    last_counter, i = take_varint(body, i)
    keyed = bool(body[i] & 1)
    return {
        "rig_id": rig_id,
        "run": run,
        "session": session,
        "last_counter": last_counter,
        "keyed": keyed,
    }


def parse_reply(body):
    """core/src/wire/codec.rs RawReply: counter, t_ms, code (varints;
    gen_wire_golden.py reply())."""
    counter, i = take_varint(body, 0)
    t_ms, i = take_varint(body, i)
    code, _ = take_varint(body, i)
    return counter, t_ms, code


def await_kind(reader, kind, timeout_s, match=lambda body: True):
    deadline = time.monotonic() + timeout_s
    while True:
        got = reader.next_frame(deadline)
        if got is None:
            return None
        k, body = got
        if k == kind and match(body):
            return body


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("address", help="HOST:PORT of the controller's TCP link")
    ap.add_argument("--timeout", type=float, default=10.0, help="seconds to wait for each answer")
    args = ap.parse_args()
    host, _, port = args.address.rpartition(":")

    deadline = time.monotonic() + args.timeout
    while True:
        try:
            sock = socket.create_connection((host, int(port)), timeout=args.timeout)
            break
        except OSError as e:
            if time.monotonic() > deadline:
                print(f"error: cannot connect to {args.address}: {e}", file=sys.stderr)
                return 2
            time.sleep(0.2)
    reader = Reader(sock)
    ok = True

    def hello():
        sock.sendall(hello_request())
        body = await_kind(reader, KIND_HELLO, args.timeout)
        if body is None:
            raise TimeoutError("no Hello after a Hello request")
        return parse_hello(body)

    def send_expect(name, data, counter, want):
        nonlocal ok
        sent = time.monotonic()
        sock.sendall(data)
        body = await_kind(
            reader, KIND_REPLY, args.timeout, lambda b: parse_reply(b)[0] == counter
        )
        if body is None:
            print(f"FAIL {name}: no Reply for counter {counter}")
            ok = False
            return
        _, t_ms, code = parse_reply(body)
        got = REPLY_CODES[code] if code < len(REPLY_CODES) else f"code {code}"
        verdict = "ok  " if got == want else "FAIL"
        ok &= got == want
        rtt_ms = (time.monotonic() - sent) * 1000
        print(
            f"{verdict} {name}: counter {counter} -> {got} (code {code}), device t_ms {t_ms}, "
            f"{rtt_ms:.0f} ms round trip; expected {want}"
        )

    try:
        h = hello()
        rig = h["rig_id"].rstrip(b"\x00").decode("ascii", "replace")
        print(
            f"hello: rig {rig!r} session {h['session']:#010x} run {h['run']} "
            f"last counter {h['last_counter']} keyed {h['keyed']}"
        )
        counter = h["last_counter"] + 1
        ack = command(counter, CMD_ACKNOWLEDGE_ALL, DEMO_KEY, h["rig_id"], h["session"])
        send_expect("acknowledge (demo key)", ack, counter, "applied")
        send_expect("same bytes again", ack, counter, "replayed")
        forged = command(counter + 1, CMD_ACKNOWLEDGE_ALL, WRONG_KEY, h["rig_id"], h["session"])
        send_expect("acknowledge (wrong key)", forged, counter + 1, "failed_authentication")
        after = hello()
        good = after["last_counter"] == counter
        ok &= good
        print(
            f"{'ok  ' if good else 'FAIL'} hello again: last counter {after['last_counter']}; "
            f"expected {counter}"
        )
    except (ConnectionError, TimeoutError, OSError) as e:
        print(f"error: {e}", file=sys.stderr)
        return 2
    finally:
        sock.close()
    seen = ", ".join(f"kind {k}: {n}" for k, n in sorted(reader.frames.items()))
    print(f"frames read: {seen}")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
