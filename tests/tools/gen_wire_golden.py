#!/usr/bin/env python3
"""Golden frames of wire protocol version 4, built from docs/wire-format.md
with general-purpose libraries only: Python's struct (IEEE 754 binary32 and
binary64, little-endian), zlib.crc32 (CRC-32/ISO-HDLC), hmac + hashlib
(HMAC-SHA-256, RFC 2104 / FIPS 180-4) and PyPI `cobs` (Consistent Overhead
Byte Stuffing).

    pip install cobs==1.2.1
    python3 tests/tools/gen_wire_golden.py > tests/vectors/wire_v4_golden.txt

Each output line is `name hex`, the whole frame on the wire (delimiter
included). tests/tests/wire_golden.rs compares heatbound's encoder and
decoders with these lines, so the Rust code is checked against an encoding
written from the specification, not against itself.
"""
import hashlib
import hmac
import struct
import zlib

from cobs import cobs  # PyPI cobs 1.2.1

VERSION = 4
KIND_HELLO, KIND_SUMMARY, KIND_EVENT, KIND_REPLY, KIND_COMMAND = 0, 1, 2, 3, 16
DOMAIN = b"heatbound command v2\x00"
DEMO_KEY = b"heatbound demo key - not secret!"
assert len(DEMO_KEY) == 32


def varint(n):
    """postcard unsigned varint (LEB128)."""
    out = bytearray()
    while True:
        b = n & 0x7F
        n >>= 7
        if n:
            out.append(b | 0x80)
        else:
            out.append(b)
            return bytes(out)


def f32(x):
    return struct.pack("<f", x)


def f64(x):
    return struct.pack("<d", x)


def opt_f32(x):
    return b"\x00" if x is None else b"\x01" + f32(x)


def opt_f64(x):
    return b"\x00" if x is None else b"\x01" + f64(x)


def frame(payload):
    """COBS(payload ++ CRC32_LE(payload)) ++ 0x00."""
    crc = zlib.crc32(payload) & 0xFFFFFFFF
    return cobs.encode(payload + struct.pack("<I", crc)) + b"\x00"


def rig_id(text):
    raw = text.encode("ascii")
    return raw + b"\x00" * (16 - len(raw))


def hello():
    body = (
        rig_id("bench-1")
        + bytes([1, 2, 3])
        + varint(100)
        + varint(60)
        + varint(0)  # engine
        + f32(2.0)
        + opt_f32(293.15)
        # uncertainties: hot, cold, heat in, work, heat out, hot2
        + f32(1.0) + f32(0.125) + f32(0.005) + f32(0.005) + f32(0.01) + f32(1.5)
        + b"\x01" + f32(0.35) + f32(0.01)  # losses: UA 0.35 W/K, u 0.01 W/K
        + varint(0x12345678)
        + varint(3)  # run
        + varint(0x0BADCAFE)  # session
        + varint(5)  # last counter
        + bytes([0x01])  # commands: keyed
    )
    return frame(bytes([VERSION, KIND_HELLO]) + body)


NAN = struct.pack("<I", 0x7FC00000)  # not available


def r32(x):
    """x rounded to IEEE 754 binary32 (the result of an f32 operation)."""
    return struct.unpack("<f", struct.pack("<f", x))[0]


# The bits that say which Summary fields travel (section 3.2).
SENT_HEAT_OUT = 1 << 7  # in status
SENT_HOT_PAIR = 1 << 6  # in faults
SENT_ENTROPY_RATE = 1 << 7  # in alarms
SENT_AMBIENT, SENT_UNCERTAINTIES, SENT_DURATION_MS = 1 << 5, 1 << 6, 1 << 7  # in verdict


def entropy_rate(s):
    """sigma-dot as section 3.2 works it out, one binary32 operation at a time."""
    if s["measured"]:
        t0 = s["ambient"]
        if t0 is None or t0 <= 0:
            return None
        loss = r32(r32(s["qi"] - s["w"]) - s["qo"])
        s_gen = r32(r32(s["so"] + r32(loss / t0)) - s["si"])
    else:
        s_gen = r32(s["so"] - s["si"])
    return r32(s_gen / s["duration"]) if s["duration"] > 0 else None


def summary_body(s):
    """The body of Summary `s` (a dict), each optional field sent only when
    a receiver could not work it out."""
    heat_out = s["qo"] != r32(s["qi"] - s["w"])
    hot_pair = s["pair"] != 0.0
    sigma = s["sigma"] != entropy_rate(s)
    us = s["u"]
    ms = round(s["duration"] * 1000)
    duration_ms = ms < 2**21 and r32(r32(float(ms)) * r32(1e-3)) == s["duration"]
    status, faults, alarms, verdict = s["bits"]
    body = varint(s["seq"]) + varint(s["t_ms"]) + bytes([
        status | (SENT_HEAT_OUT if heat_out else 0),
        faults | (SENT_HOT_PAIR if hot_pair else 0),
        alarms | (SENT_ENTROPY_RATE if sigma else 0),
        verdict
        | (SENT_AMBIENT if s["ambient"] is not None else 0)
        | (SENT_UNCERTAINTIES if any(u is not None for u in us) else 0)
        | (SENT_DURATION_MS if duration_ms else 0),
    ])
    body += varint(ms) if duration_ms else f32(s["duration"])
    body += f32(s["qi"]) + f32(s["w"])
    body += f32(s["qo"]) if heat_out else b""
    body += f32(s["si"]) + f32(s["so"]) + f32(s["ht"])
    body += f32(s["pair"]) if hot_pair else b""
    body += f32(s["ambient"]) if s["ambient"] is not None else b""
    body += (NAN if s["sigma"] is None else f32(s["sigma"])) if sigma else b""
    if any(u is not None for u in us):
        body += b"".join(NAN if u is None else f32(u) for u in us)
    if verdict >> 2:  # a suspect: its bias travels
        body += NAN if s["bias"] is None else f32(s["bias"])
    return body


def summary():
    # An engine with heat out inferred (so Q_out = Q_in - W does not travel)
    # and a second hot sensor; sigma-dot is what the integrals give, so it
    # does not travel either.
    # The window is 6000 ms, which a controller makes 6000 * 1e-3 in binary32
    # (6.0000005 s): the duration travels as those milliseconds.
    s = dict(
        seq=513, t_ms=120000, duration=r32(r32(6000.0) * r32(1e-3)), qi=6000.0, w=1800.0,
        qo=4200.0, si=10.0, so=14.0, ht=3600.0, pair=240.0, ambient=300.0, measured=False,
        sigma=None,
        u=[0.004, 0.002, 0.0045, None], bias=40.0,
        # status: steady, hot2 read, engine; no faults; no alarms;
        # verdict: inconsistent, suspect channel 0 (hot) + 1
        bits=(0x11, 0x00, 0x00, 0x02 | (1 << 2)),
    )
    s["sigma"] = entropy_rate(s)
    return frame(bytes([VERSION, KIND_SUMMARY]) + summary_body(s))


def summary_measured():
    # Heat out measured, T0 configured, no second hot sensor, a duration
    # that is not whole milliseconds, no diagnosis yet, beyond_carnot active.
    s = dict(
        seq=7, t_ms=5000, duration=r32(1.0005), qi=500.0, w=100.0, qo=390.0, si=1.0, so=1.3,
        ht=250.0, pair=0.0, ambient=295.0, measured=True, sigma=None,
        u=[0.01, 0.02, 0.03, 0.04], bias=None,
        bits=(0x03, 0x00, 0x01, 0x00),  # steady, heat out measured, engine
    )
    s["so"], s["ambient"] = r32(s["so"]), r32(s["ambient"])
    s["sigma"] = entropy_rate(s)
    return frame(bytes([VERSION, KIND_SUMMARY]) + summary_body(s))


def event():
    # beyond_carnot (0) raised (0), trip (2); verdict: inconsistent, suspect hot
    body = varint(513) + varint(341000) + varint(0) + varint(0) + varint(2) + bytes([0x06])
    return frame(bytes([VERSION, KIND_EVENT]) + body)


def reply():
    # command 7 applied at t = 341.5 s
    body = varint(7) + varint(341500) + varint(0)
    return frame(bytes([VERSION, KIND_REPLY]) + body)


def default_config():
    """postcard of RigConfig::default(), fields in declaration order."""
    sqrt3 = 1.7320508075688772
    out = varint(0)  # mode engine
    out += opt_f64(None)  # ambient: the cold-side mean
    out += varint(60)  # window_samples
    out += f64(10.0) + f64(2.0)  # max_gap_s, coverage_factor
    # uncertainty: hot, hot2, cold, heat in, work, heat out
    out += b"".join(f64(x) for x in [2.0 / sqrt3, 2.0 / sqrt3, 0.25 / sqrt3, 0.01 / sqrt3, 0.01 / sqrt3, 0.02 / sqrt3])
    out += b"".join(f64(x) for x in [60.0, 2.0, 2.0, 0.05, 0.05, 0.05])  # steady
    out += varint(0) + f64(10.0) + f64(1.0) + f64(3000.0)  # health
    out += f64(0.75) + f64(1100.0) + f64(600.0)  # near_carnot_fraction, hot_max_k, horizon_s
    # rules: enabled, severity (0 advisory, 1 warning, 2 trip), deadband, on, off, latching
    rules = [
        (2, 0.01, True),  # beyond_carnot
        (2, 0.01, True),  # negative_entropy_production
        (0, 0.01, False),  # near_carnot
        (1, 0.01, False),  # energy_balance
        (2, 0.01 * 1100.0, True),  # over_temperature
        (1, 0.0, False),  # sensor_fault
        (0, 60.0, False),  # limit_ahead
    ]
    for severity, deadband, latching in rules:
        out += b"\x01" + varint(severity) + f64(deadband) + f64(5.0) + f64(5.0)
        out += b"\x01" if latching else b"\x00"
    out += opt_f64(None)  # losses: learned
    return out


def command(counter, body, session=0x0BADCAFE, key=DEMO_KEY, rig="bench-1"):
    payload = bytes([VERSION, KIND_COMMAND]) + varint(counter) + body
    mac = hmac.new(key, DOMAIN + rig_id(rig) + struct.pack("<I", session) + payload, hashlib.sha256)
    return frame(payload + mac.digest()[:8])


def main():
    lines = [
        ("hello", hello()),
        ("summary", summary()),
        ("summary_measured", summary_measured()),
        ("event", event()),
        ("reply", reply()),
        # Hello request, unsealed (an all-zero tag): counter 0, variant 0.
        ("command_hello", frame(bytes([VERSION, KIND_COMMAND]) + varint(0) + varint(0) + bytes(8))),
        # Acknowledge(Some(beyond_carnot)), counter 7: variant 1, Some, rule 0.
        ("command_ack_rule", command(7, varint(1) + b"\x01" + varint(0))),
        # Acknowledge(None) (every alarm), counter 8.
        ("command_ack_all", command(8, varint(1) + b"\x00")),
        # NewRun, counter 9: variant 2.
        ("command_new_run", command(9, varint(2))),
        # Configure(RigConfig::default()), counter 10: variant 3.
        ("command_configure", command(10, varint(3) + default_config())),
    ]
    for name, data in lines:
        print(name, data.hex())


if __name__ == "__main__":
    main()
