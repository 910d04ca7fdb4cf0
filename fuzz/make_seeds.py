#!/usr/bin/env python3
"""Writes the fuzz seed corpora under fuzz/seeds/<target>/ from the
project's test data (tests/data/candump, replays/demo.tvrec, config/,
tests/configs/bad) and hand-written protocol lines. Run from anywhere;
the output is deterministic, so re-running it changes nothing."""

import os
import shutil

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
SEEDS = os.path.join(ROOT, "fuzz", "seeds")


def read(path):
    with open(os.path.join(ROOT, path), "rb") as f:
        return f.read()


def write(target, name, data):
    d = os.path.join(SEEDS, target)
    os.makedirs(d, exist_ok=True)
    with open(os.path.join(d, name), "wb") as f:
        f.write(data)


def nmea(body):
    c = 0
    for b in body.encode():
        c ^= b
    return "$%s*%02X" % (body, c)


def crc8(data):
    crc = 0
    for b in data:
        crc ^= b
        for _ in range(8):
            crc = ((crc << 1) ^ 0x07) & 0xFF if crc & 0x80 else (crc << 1) & 0xFF
    return crc


def lines_line(body):
    return "%s #%02X" % (body, crc8(body.encode()))


def main():
    if os.path.isdir(SEEDS):
        shutil.rmtree(SEEDS)

    # candump: every line of the small logs, and the first lines of big.log.
    logs = ["kinds.log", "edges.log", "damaged.log", "torn.log"]
    n = 0
    seen = set()
    for log in logs:
        for line in read("tests/data/candump/" + log).split(b"\n"):
            if line and line not in seen:
                seen.add(line)
                write("candump", "%s-%03d" % (log[:-4], n), line)
                n += 1
    for i, line in enumerate(read("tests/data/candump/big.log").split(b"\n")[:40]):
        write("candump", "big-%03d" % i, line)
    for i, line in enumerate([
        b"(1436509052.249713) can0 044#2A366C2BBA",
        b"(1.000000) vcan1 1FFFFFFF#",
        b"(2.123456789) can0 7FF#R8",
        b"(3.000000) can0 12345678##5000102030405060708090A0B",
        b"(4.000000) can0 20000004#0010000000000000",
        b"(9223372035.999999) can0 123#1122334455667788_C",
        b"(5.1) c 123#11.22.33 T",
        b"(1.5) can0 123##1" + b"AB" * 64,
        b"(1.5) can0 123#R8_F R",
    ]):
        write("candump", "hand-%02d" % i, line)

    # recording: the small logs whole, pieces of the demo recording, and a
    # hand-written recording with every kind of event.
    for log in logs:
        write("recording", log, read("tests/data/candump/" + log))
    write("recording", "big-head.log", b"\n".join(read("tests/data/candump/big.log").split(b"\n")[:200]) + b"\n")
    demo = read("replays/demo.tvrec").split(b"\n")
    end = demo.index(b"%end-header")
    # Header with the first 60 body lines; the header alone, cut short; a
    # stretch of body with no header (events from undeclared sources).
    write("recording", "demo-head.tvrec", b"\n".join(demo[: end + 61]) + b"\n")
    write("recording", "demo-cut-header.tvrec", b"\n".join(demo[:120]) + b"\n")
    write("recording", "demo-body.tvrec", b"\n".join(demo[end + 1000 : end + 1100]) + b"\n")
    sources = [l for l in demo[:end] if l.startswith(b"%source") or l.startswith(b"%termvel") or l.startswith(b"%created")]
    write("recording", "demo-sources.tvrec", b"\n".join(sources + [b"%end-header"] + demo[end + 1 : end + 200]) + b"\n")
    write("recording", "events.tvrec", "\n".join([
        "%termvel-recording 1",
        "%created 2026-12-02T10:11:12Z",
        "%program termvel 0.1.0",
        "%source op operator",
        "%source session session",
        "%source can0 can",
        "%source gnss0 nmea",
        "%source log0 lines",
        "%config track 3 config/track.toml",
        "%|kind = \"track\"",
        "%|name = \"x\"",
        "%|",
        "%end-header",
        "(1764670272.123456) can0 0C4#E02E000000000000",
        "(1764670272.123457123) can0 3C0##1ED94BF954A4E0000D3000000B0040000",
        "[1764670272.130000] gnss0 line " + nmea("GPRMC,220516,A,5133.82,N,00042.24,W,173.8,231.8,130694,004.2,W"),
        "[1764670272.130001] log0 line " + lines_line("vehicle.speed[km/h]=83.21 battery.temp=41.5"),
        "[1764670272.130002] gnss0 line \\x00\\xff garbage\\\\",
        "[1764670272.500000] op mark boost on at the 2 km board",
        "[1764670273.000000] op ack coolant hot",
        "[1764670273.000001] op ack *",
        "[1764670274.000000] gnss0 link down device vanished",
        "[1764670274.000001] gnss0 link up",
        "[1764670274.000002] can0 lost 17",
        "[1764670274.100000] session tick",
        "[1764670274.100000] session note raise caution boost-low \\xe2\\x80\\xa6",
        "%source can1 can",
        "(1764670275.000000) can1 18FEF100#4E4E5151",
        "(1764670276.000000) can1 123#R",
        "(1764670276.1) can1 20000040#0000000000000000",
        "(1764670276.2) can1 123#0011",
    ]).encode())

    # NMEA sentences (from src/decode/nmea.rs tests and built here).
    sentences = [
        "$GPRMC,220516,A,5133.82,N,00042.24,W,173.8,231.8,130694,004.2,W*70",
        "$GPRMC,225446,A,4916.45,N,12311.12,W,000.5,054.7,191194,020.3,E*68",
        "$GPVTG,45.5,T,67.5,M,30.45,N,56.40,K*4B",
        "$GPGGA,034225.077,3356.4650,S,15124.5567,E,1,03,9.7,-25.0,M,21.0,M,,0000*51",
        "$GPGGA,133605.0,5521.75946,N,03731.93769,E,0,00,,,M,,M,,*4F",
        "$GNRMC,142754.0,A,4302.539570,N,07920.379823,W,0.0,,070617,0.0,E,A*21",
        "$GPRMC,225446.33,A,4916.45,N,12311.12,W,000.5,054.7,191194,020.3,E,A*2B",
        "$GPVTG,360.0,T,348.7,M,000.0,N,000.0,K*43",
        "$GPGSV,3,1,12,01,49,196,41,03,71,278,32,06,02,323,27,11,21,196,39*72",
        "$GNTXT,01,01,02,u-blox AG - www.u-blox.com*4E",
        "$PGRMZ,2282,f,3*21",
        "$GPVTG,,,,,,,,,N*30",
        "$GPRMC,,V,,,,,,,,,,N*53",
        nmea("GPVTG,054.7,T,034.4,M,,N,010.2,K"),
        nmea("GPRMC,235960.999,A,8959.9999,S,17959.9999,E,999.9,359.9,311299,,,D"),
        nmea("GNGGA,000000,0000.0000,N,00000.0000,W,8,255,,-9999.9,M,,M,,"),
        "$GPRMC,074210.00,A,4648.74040,N,07124.12780,E,0.223,84.0,140326,,,A*66\r\n",
        # Found by the fuzzer: a time field with more than six digits before
        # the '.' reads as hhmm and 18000.00016 seconds (see README.md).
        nmea("GPRMC,220518000.00016,A,5133.82,N,00042.24,W,173.8,231.8,130694,004.2,W"),
    ]
    for i, s in enumerate(sentences):
        write("nmea", "s%02d" % i, s.encode())

    # slcan messages (from src/decode/slcan.rs tests): a stream and singles.
    msgs = [
        "t1230", "t4563112233", "T12ABCDEF2AA55", "t7FF8aabbccddeeff0011", "r1230", "R12ABCDEF8",
        "t1232AABB1F40", "t1230EA5F", "r1234ea5f", "d1239000102030405060708090A0B",
        "B1ABCDEF0F" + "5A" * 64 + "0102", "D00000001D" + "00" * 32, "b7FF0", "F00", "Fa5",
        "V1013", "NA123", "z", "Z", "",
    ]
    for i, m in enumerate(msgs):
        write("slcan", "m%02d" % i, m.encode() + b"\r")
    write("slcan", "stream", ("\r".join(msgs) + "\r\x07z\rt45").encode())

    # Line telemetry (format from src/decode/lines.rs).
    bodies = [
        "vehicle.speed=83.21 battery.temp=41.5",
        "vehicle.speed[km/h]=83.21 battery.temp[degC]=41.5",
        "tyre.fl.pressure[kPa]=231 tyre.fr.pressure[bar]=2.3 driver.throttle[%]=97",
        "a=1e-3 b=-0.5 c=42 d=1E300 e=.5",
        "x_1.y_2.z_3=0",
        "battery.soc[%]=55.5 battery.voltage[V]=812.4 battery.current[A]=-120",
    ]
    for i, b in enumerate(bodies):
        write("lines", "l%02d" % i, lines_line(b).encode())
    write("lines", "cr", (lines_line(bodies[0]) + "\r").encode())

    # Configs: the demo set, the demo plan and every bad file.
    for name in sorted(os.listdir(os.path.join(ROOT, "config"))):
        if name.endswith(".toml"):
            write("config", name, read("config/" + name))
    for name in sorted(os.listdir(os.path.join(ROOT, "tests/configs/bad"))):
        write("config", "bad-" + name, read("tests/configs/bad/" + name))
    # Signal maps followed by a NUL and frame bytes (see fuzz_targets/signals.rs).
    frames = bytes(range(256))
    write("signals", "demo", read("config/signals.toml") + b"\0" + frames)
    for name in sorted(os.listdir(os.path.join(ROOT, "tests/configs/bad"))):
        if name.startswith("signals-"):
            write("signals", "bad-" + name, read("tests/configs/bad/" + name) + b"\0" + frames)
    write("signals", "layouts", b"""kind = "signals"
bitrate = 500000

[[message]]
id = 0x100
name = "fd"
period_ms = 10
length = 64
fd = true

  [[message.signal]]
  name = "a"
  channel = "x.a"
  start_bit = 4
  bit_length = 64
  byte_order = "little"
  scale = 1
  unit = ""

  [[message.signal]]
  name = "b"
  channel = "x.b"
  start_bit = 83
  bit_length = 64
  byte_order = "big"
  signed = true
  scale = -0.5
  offset = 3
  unit = "km/h"
  min = -10
  max = 10

  [[message.signal]]
  name = "c"
  channel = "battery.temp"
  start_bit = 504
  bit_length = 8
  byte_order = "little"
  signed = true
  scale = 1
  unit = "degC"

[[message]]
id = 0x1ABCDEF
frame = "extended"
name = "classic"
period_ms = 10
length = 8

  [[message.signal]]
  name = "d"
  channel = "x.d"
  start_bit = 7
  bit_length = 64
  byte_order = "big"
  scale = 1
  unit = ""
\0""" + frames)

    # CAN frames and decoder events are binary: a few byte patterns.
    for target in ("can_decode", "decoder"):
        write(target, "zeros", bytes(64))
        write(target, "ramp", bytes(range(256)))
        write(target, "ff", b"\xff" * 128)
    # Decoder events: kind byte, time byte, then a line (length, bytes) or a frame.
    ev = bytearray()
    for kind, line in [(1, sentences[0]), (2, lines_line(bodies[1])), (0, "t0C48E02E000000000000"),
                       (1, sentences[3]), (2, lines_line(bodies[2])), (3, "x")]:
        ev += bytes([kind, 1, len(line)]) + line.encode()
    ev += bytes([0x24, 1, 0, 0, 0]) + bytes(range(8))
    write("decoder", "events", bytes(ev))


if __name__ == "__main__":
    main()
