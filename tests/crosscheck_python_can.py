#!/usr/bin/env python3
"""Cross-checks termvel's candump reader against python-can's.

Every log in tests/data/candump/ is read twice: by python-can's
`can.io.CanutilsLogReader` (an independent reader of the `candump -L` format)
and by termvel's `RecordingReader`, through the `dump-frames` example, which
prints each frame as JSON with its line number. The two are compared line by
line: time (within 1 µs), interface, arbitration id, extended, remote, error
and FD flags, BRS and ESI, DLC and data bytes. Every line termvel reports as
malformed must be one python-can rejects too, or a known difference; lines
termvel rejects but python-can reads are listed as "stricter" (not failures).

python-can is fed one line at a time (a bad line makes it raise and stop, which
would hide the rest of the file). A whole-file read is also done and must give
the same frames as the line-by-line read up to the point where it raises.

Known differences (python-can 4.6, notes/crates.md and python-can's
canutils.py): each is listed with its file:line and not counted as a failure,
because python-can, not termvel, departs from can-utils there, or because
python-can does not carry the information:
  error-frame-without-bus-error-bit  python-can reads an error frame only when
      the bus-error bit 0x80 is also set; `20000004#...` comes back as an
      extended data frame with id 0x4 (checked: id = error class, same data).
  error-frame-details-dropped  an error frame python-can does read keeps no
      class, data or interface; only the time and the error flag are compared.
  fd-flags-hex       python-can reads the FD flags nibble as decimal: `##A` raises.
  dot-separator      python-can raises on `.` between data bytes.
  remote-hex-length  python-can reads the remote length as decimal: `#RA` raises.
  classic-over-8-bytes  python-can accepts a classic frame of more than 8
      bytes (e.g. 12); termvel rejects it.
  len8-dlc-suffix    python-can raises on can-utils' `_<dlc>` suffix after 8
      bytes, or after a remote length of 8 (`#R8_C`) (Linux len8_dlc); not in
      notes/crates.md, seen in canutils.py.
  torn-tail          termvel skips a last line without its newline (a cut
      write) and reports it; python-can reads whatever the cut left.
A rule applies only when both the line's syntax and python-can's outcome fit
it; anything else that differs is a failure, printed as
`FILE:LINE: field: termvel=... python-can=...`, and the exit status is 1.

Run from the repository root:
    pip install -r tests/requirements.txt
    python3 tests/crosscheck_python_can.py [DUMP_FRAMES_BINARY]
The dump-frames binary comes from the argument, else $TERMVEL_DUMP_FRAMES,
else `cargo run -q --release --example dump-frames --`.
"""

from __future__ import annotations

import argparse
import io
import json
import locale
import os
import re
import subprocess
import sys
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

import can
from can.io import CanutilsLogReader

ROOT = Path(__file__).resolve().parent.parent
DATA = Path("tests") / "data" / "candump"
TIME_TOLERANCE_S = 1e-6
CAN_ERR_BUSERROR = 0x80

HEX = "[0-9A-Fa-f]"


@dataclass
class PyLine:
    """python-can's reading of one line: messages, or the exception it raised."""

    msgs: list = field(default_factory=list)
    error: str | None = None


@dataclass
class Report:
    compared: int = 0
    both_reject: list = field(default_factory=list)  # (file, line, termvel message, python error)
    known: list = field(default_factory=list)  # (file, line, rule, detail)
    stricter: list = field(default_factory=list)  # (file, line, termvel message, python reading)
    failures: list = field(default_factory=list)  # strings

    def fail(self, where: str, what: str, tv, py) -> None:
        self.failures.append(f"{where}: {what}: termvel={tv} python-can={py}")


def python_read_line(raw: bytes, encoding: str) -> PyLine:
    # python-can opens a path in text mode with the locale's encoding (strict):
    # a line that does not decode makes it raise.
    try:
        text = raw.decode(encoding)
    except UnicodeDecodeError as e:
        return PyLine(error=f"UnicodeDecodeError: {e.reason}")
    try:
        # newline=None: the universal newlines a text-mode file would apply.
        return PyLine(msgs=list(CanutilsLogReader(io.StringIO(text + "\n", newline=None))))
    except Exception as e:  # noqa: BLE001 - any exception is python-can rejecting the line
        return PyLine(error=f"{type(e).__name__}: {e}")


def python_read_whole(path: Path, encoding: str) -> tuple[list, str | None]:
    msgs: list = []
    try:
        reader = CanutilsLogReader(path, encoding=encoding)
        for m in reader:
            msgs.append(m)
    except Exception as e:  # noqa: BLE001
        return msgs, f"{type(e).__name__}: {e}"
    return msgs, None


def printable(s: str) -> str:
    return "".join(c if c.isprintable() else f"\\x{ord(c):02x}" if ord(c) < 256 else "?" for c in s)


def describe_py(m: can.Message) -> str:
    if m.is_error_frame:
        return f"error frame t={m.timestamp:.6f}"
    kind = "remote" if m.is_remote_frame else "fd" if m.is_fd else "data"
    ext = "ext" if m.is_extended_id else "std"
    data = bytes(m.data or b"").hex().upper() or "-"
    return f"{kind} {ext} 0x{m.arbitration_id:X} dlc {m.dlc} data {data} t={m.timestamp:.6f}"


def frame_token(raw: bytes) -> str:
    """The frame field of a log line, split the way python-can splits it."""
    parts = raw.decode("utf-8", "replace").split()
    return parts[2] if len(parts) >= 3 else ""


def known_rejection(token: str, error: str) -> str | None:
    """The known difference explaining python-can raising on a frame termvel reads."""
    m = re.match(rf"^{HEX}+(##?)(.*)$", token)
    if not m or not error.startswith("ValueError: invalid literal for int()"):
        return None
    fd, rest = m.group(1) == "##", m.group(2)
    base10 = "with base 10" in error
    if fd and re.match(r"^[A-Fa-f]", rest) and base10:
        return "fd-flags-hex"
    if not fd and re.match(r"^[Rr][A-Fa-f]$", rest) and base10:
        return "remote-hex-length"
    data = rest[1:] if fd else rest
    if not fd and re.match(rf"^(?:{HEX}{{2}}){{8}}_{HEX}$", data) and "'_" in error:
        return "len8-dlc-suffix"
    if not fd and re.match(rf"^[Rr]8_{HEX}$", rest) and "_" in error:
        return "len8-dlc-suffix"
    if "." in data and "." in error.split(":", 2)[-1]:
        return "dot-separator"
    return None


def compare_fields(t: dict, p: can.Message, as_kind: str | None = None) -> list[tuple[str, object, object]]:
    """Field differences between a termvel frame and a python-can message."""
    kind = as_kind or t["kind"]
    diffs = []

    def chk(name, tv, pv):
        if tv != pv:
            diffs.append((name, tv, pv))

    if abs(p.timestamp - t["t_ns"] / 1e9) > TIME_TOLERANCE_S:
        diffs.append(("time", f"{t['t_ns']}ns", repr(p.timestamp)))
    iface = t["iface"]
    chk("channel", int(iface) if iface.isascii() and iface.isdigit() else iface, p.channel)
    chk("arbitration_id", hex(t["id"]), hex(p.arbitration_id))
    chk("extended", t["extended"], p.is_extended_id)
    chk("remote", kind == "remote", p.is_remote_frame)
    chk("error", kind == "error", p.is_error_frame)
    chk("fd", kind == "fd", p.is_fd)
    flags = t.get("flags", 0) if kind == "fd" else 0
    chk("bitrate_switch", bool(flags & 1), p.bitrate_switch)
    chk("error_state_indicator", bool(flags & 2), p.error_state_indicator)
    data = bytes.fromhex(t["data"])
    chk("dlc", t["dlc"] if kind == "remote" else len(data), p.dlc)
    chk("data", t["data"] or "-", bytes(p.data or b"").hex().upper() or "-")
    return diffs


def run_termvel(files: list[str], binary: str | None) -> tuple[dict, dict]:
    cmd = [binary] if binary else ["cargo", "run", "-q", "--release", "--example", "dump-frames", "--"]
    proc = subprocess.run(cmd + files, cwd=ROOT, capture_output=True, text=True, encoding="utf-8")
    if proc.returncode != 0:
        sys.exit(f"dump-frames failed ({proc.returncode}):\n{proc.stderr}")
    frames: dict[str, dict[int, dict]] = {f: {} for f in files}
    summaries: dict[str, dict] = {}
    for out_line in proc.stdout.splitlines():
        obj = json.loads(out_line)
        if "summary" in obj:
            summaries[obj["summary"]["file"]] = obj["summary"]
            continue
        if obj.get("line") is None:
            sys.exit(f"{obj['file']}: dump-frames gave no line number (not a candump log?)")
        if obj["line"] in frames[obj["file"]]:
            sys.exit(f"{obj['file']}:{obj['line']}: two termvel frames on one line")
        frames[obj["file"]][obj["line"]] = obj
    return frames, summaries


def check_file(name: str, tv_frames: dict[int, dict], summary: dict, encoding: str, rep: Report) -> dict:
    raw = (ROOT / name).read_bytes()
    lines = raw.split(b"\n")
    ends_with_newline = raw.endswith(b"\n") or not raw
    if ends_with_newline:
        lines.pop()  # the empty piece after the last newline
    torn_line = None if ends_with_newline else len(lines)
    short = Path(name).name
    stats = Counter()

    if summary["torn_tail"] != (torn_line is not None):
        rep.fail(f"{short}:{len(lines)}", "torn tail", summary["torn_tail"], f"file ends with newline: {ends_with_newline}")
    if summary["events"] != len(tv_frames):
        rep.fail(short, "events", summary["events"], f"{len(tv_frames)} frames printed")
    if summary["malformed"] != len(summary["errors"]):
        rep.fail(short, "malformed", summary["malformed"], f"only {len(summary['errors'])} kept: lines unattributable")
    tv_errors = {line: msg for line, msg in summary["errors"]}
    for n in sorted(set(tv_frames) | set(tv_errors)):
        if not 1 <= n <= len(lines):
            rep.fail(f"{short}:{n}", "line", "frame or error here", f"the file has {len(lines)} lines")

    py_lines: list[PyLine] = []
    for n, raw_line in enumerate(lines, start=1):
        where = f"{short}:{n}"
        py = python_read_line(raw_line, encoding)
        py_lines.append(py)
        t, t_err = tv_frames.get(n), tv_errors.get(n)
        if len(py.msgs) > 1:
            rep.fail(where, "frames on the line", 1 if t else 0, len(py.msgs))
            continue
        p = py.msgs[0] if py.msgs else None
        stats["python frames"] += p is not None
        stats["termvel frames"] += t is not None

        if n == torn_line:
            if t is None and t_err is None:
                stats["known"] += 1
                rep.known.append((short, n, "torn-tail", f"python-can: {describe_py(p) if p else py.error or 'nothing'}"))
            else:
                rep.fail(where, "torn tail", t or t_err, describe_py(p) if p else py.error)
            continue

        if t is not None and p is not None:
            if t["kind"] == "error" and not t["id"] & CAN_ERR_BUSERROR:
                diffs = compare_fields(t, p, as_kind="data")
                if not diffs:
                    stats["known"] += 1
                    rep.known.append((short, n, "error-frame-without-bus-error-bit",
                                      f"termvel error class 0x{t['id']:X}; python-can {describe_py(p)}"))
                    continue
            elif t["kind"] == "error" and p.is_error_frame:
                if abs(p.timestamp - t["t_ns"] / 1e9) <= TIME_TOLERANCE_S:
                    stats["known"] += 1
                    rep.known.append((short, n, "error-frame-details-dropped",
                                      f"termvel error class 0x{t['id']:X} data {t['data'] or '-'}; python-can: error frame"))
                    continue
                diffs = [("time", f"{t['t_ns']}ns", repr(p.timestamp))]
            else:
                diffs = compare_fields(t, p)
            if diffs:
                for fname, tv, pv in diffs:
                    rep.fail(where, fname, tv, pv)
            else:
                rep.compared += 1
        elif t is not None:  # python-can raised
            rule = known_rejection(frame_token(raw_line), py.error or "")
            if rule:
                stats["known"] += 1
                rep.known.append((short, n, rule, f"python-can: {py.error}"))
            else:
                rep.fail(where, "frame", f"{t['kind']} 0x{t['id']:X} {t['data'] or '-'}", f"rejected ({py.error})")
        elif t_err is not None:
            if p is None and py.error:
                rep.both_reject.append((short, n, t_err, py.error))
            elif p is None:
                rep.fail(where, "line", f"malformed ({t_err})", "skipped as blank")
            elif (not p.is_fd and not p.is_remote_frame and not p.is_error_frame and len(p.data or b"") > 8
                  and "at most 8 data bytes in a classic frame" in t_err):
                stats["known"] += 1
                rep.known.append((short, n, "classic-over-8-bytes", f"python-can: {describe_py(p)}; termvel: {t_err}"))
            else:
                rep.stricter.append((short, n, t_err, describe_py(p)))
        elif p is not None:
            rep.fail(where, "frame", "none (and no error reported)", describe_py(p))
        elif py.error:
            rep.fail(where, "line", "skipped (no frame, no error)", f"rejected ({py.error})")

    # The whole-file read must give the same frames as the line-by-line one,
    # up to the first line python-can rejects. A line that does not decode
    # stops it earlier: text files decode in chunks, so the frames of the
    # lines before the bad byte in its chunk are lost too.
    whole, whole_err = python_read_whole(ROOT / name, encoding)
    first_bad = next((i for i, pl in enumerate(py_lines) if pl.error), None)
    upto = py_lines if first_bad is None else py_lines[:first_bad]
    expected = [m for pl in upto for m in pl.msgs]
    decode_stop = bool(whole_err) and whole_err.startswith("UnicodeDecodeError")
    same = all(a.equals(b, timestamp_delta=0) for a, b in zip(whole, expected))
    if (whole_err is None) != (first_bad is None) or not same or (
        len(whole) > len(expected) if decode_stop else len(whole) != len(expected)
    ):
        rep.fail(short, "python-can whole-file read",
                 f"{len(expected)} frames then {'an error' if first_bad is not None else 'the end'}",
                 f"{len(whole)} frames then {whole_err or 'the end'}")
    stats["whole-file"] = "complete" if whole_err is None else f"{len(whole)} frames, then {whole_err.split(':')[0]}"
    stats["lines"] = len(lines)
    stats["termvel malformed"] = len(tv_errors)
    return stats


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("dump_frames", nargs="?", help="path of the dump-frames example binary")
    args = ap.parse_args()
    binary = args.dump_frames or os.environ.get("TERMVEL_DUMP_FRAMES")
    encoding = locale.getpreferredencoding(False)

    files = sorted(str(p.relative_to(ROOT)) for p in (ROOT / DATA).glob("*.log"))
    if not files:
        sys.exit(f"no logs in {ROOT / DATA}")
    tv_frames, summaries = run_termvel(files, binary)
    rep = Report()
    print(f"python-can {can.__version__} (CanutilsLogReader, encoding {encoding}) vs termvel dump-frames")
    print(f"{'file':<12} {'lines':>6} {'termvel':>8} {'python':>8} {'tv-malformed':>13} {'known':>6}  python whole-file read")
    for name in files:
        if name not in summaries:
            rep.failures.append(f"{name}: no summary from dump-frames")
            continue
        s = check_file(name, tv_frames[name], summaries[name], encoding, rep)
        print(f"{Path(name).name:<12} {s['lines']:>6} {s['termvel frames']:>8} {s['python frames']:>8} "
              f"{s['termvel malformed']:>13} {s['known']:>6}  {s['whole-file']}")

    print(f"\nknown differences ({len(rep.known)}, not failures):")
    for f, n, rule, detail in rep.known:
        print(f"  {f}:{n}: {rule}: {detail}")
    print(f"\nrejected by both ({len(rep.both_reject)}):")
    for f, n, tv, py in rep.both_reject:
        print(f"  {f}:{n}: termvel: {printable(tv)} | python-can: {printable(py)}")
    print(f"\nstricter: termvel rejects, python-can reads ({len(rep.stricter)}, not failures):")
    for f, n, tv, py in rep.stricter:
        print(f"  {f}:{n}: termvel: {printable(tv)} | python-can: {printable(py)}")
    print(f"\nfailures ({len(rep.failures)}):")
    for line in rep.failures:
        print(f"  {line}")
    by_rule = Counter(rule for _, _, rule, _ in rep.known)
    print("\nsummary: frames compared equal: {}; known differences: {} ({}); rejected by both: {}; "
          "stricter: {}; failures: {}".format(
              rep.compared, len(rep.known), ", ".join(f"{r} {c}" for r, c in sorted(by_rule.items())) or "none",
              len(rep.both_reject), len(rep.stricter), len(rep.failures)))
    return 1 if rep.failures else 0


if __name__ == "__main__":
    sys.exit(main())
