"""Independent checks of termvel's report and export, run by
tests/suite/report.rs with the project's venv (tests/requirements.txt).

Usage: report_check.py RECORDING CSV PARQUET LONG_PARQUET

1. Decodes the recording's CAN frames with python-can (its candump-format
   reader) and this file's own byte slicing of the demo signal map's layouts
   (written out by hand below from config/signals.toml), and computes what
   the report states: the peak of vehicle speed, the energy out of the
   battery (trapezoids of voltage x current), the state of charge at the
   start and the end.
2. Reads the Parquet export with pyarrow and the CSV export with Python's csv
   module, and compares them cell for cell; checks the units metadata and
   the timestamp type.
3. Reads the long-form Parquet export and counts the vehicle speed samples,
   against the number of pt_state frames in the recording.

Prints one JSON object.
"""

import csv
import json
import math
import sys
import tempfile

import can
import pyarrow.parquet as pq

rec, csv_path, pq_path, long_path = sys.argv[1:5]

# 1. python-can over the candump lines of the recording.
with open(rec, encoding="utf-8", errors="replace") as f:
    can_lines = [line for line in f if line.startswith("(")]
with tempfile.NamedTemporaryFile("w", suffix=".log", delete=False) as tmp:
    tmp.writelines(can_lines)
    log = tmp.name

speed_max = 0.0
n_pt = 0
pack = []  # (t, V, A, soc)
for msg in can.io.CanutilsLogReader(log):
    d = msg.data
    if msg.arbitration_id == 0x0C4 and not msg.is_remote_frame and len(d) >= 2:
        n_pt += 1
        # vehicle_speed: little-endian 16 bits from bit 0, 0.01 km/h.
        speed_max = max(speed_max, int.from_bytes(d[0:2], "little") * 0.01)
    if msg.arbitration_id == 0x1A0 and len(d) >= 5:
        # pack_voltage: big-endian 16 bits from bit 7 (bytes 0-1), 0.05 V;
        # pack_current: signed, bytes 2-3, 0.05 A; pack_soc: byte 4, 0.5 %.
        v = int.from_bytes(d[0:2], "big") * 0.05
        i = int.from_bytes(d[2:4], "big", signed=True) * 0.05
        soc = d[4] * 0.5 / 100.0
        pack.append((msg.timestamp, v, i, soc))

energy_out = 0.0
for (t0, v0, i0, _), (t1, v1, i1, _) in zip(pack, pack[1:]):
    energy_out += 0.5 * (max(v0 * i0, 0.0) + max(v1 * i1, 0.0)) * (t1 - t0)

# 2. CSV against Parquet, cell for cell.
with open(csv_path, newline="", encoding="utf-8") as f:
    rows = list(csv.reader(f))
header, body = rows[0], rows[1:]
table = pq.read_table(pq_path)
cols = table.column_names
mismatches = []
if cols != header:
    mismatches.append(f"columns differ: {cols[:5]}... vs {header[:5]}...")
else:
    for j, name in enumerate(cols):
        values = table.column(name).to_pylist()
        kind = str(table.schema.field(name).type)
        for r, (a, b) in enumerate(zip(values, (row[j] for row in body))):
            if kind.startswith("timestamp"):
                break  # compared as integers below
            if a is None:
                ok = b == ""
            elif isinstance(a, float):
                ok = b != "" and float(b) == a
            else:
                ok = str(a) == b
            if not ok:
                mismatches.append(f"{name} row {r}: parquet {a!r}, csv {b!r}")
                break
    # The time column as integers.
    raw = table.column("t_ns").cast("int64").to_pylist()
    if [int(row[0]) for row in body] != raw:
        mismatches.append("t_ns differs")
units = json.loads(table.schema.metadata[b"termvel.units"])

# 3. The long form.
long = pq.read_table(long_path)
chan = long.column("channel").to_pylist()
long_speed = sum(1 for c in chan if c == "vehicle.speed")
long_derived = sum(1 for c in chan if c.startswith("derived."))

print(json.dumps({
    "peak_kmh": speed_max,
    "energy_out_j": energy_out,
    "soc_first": pack[0][3] if pack else None,
    "soc_last": pack[-1][3] if pack else None,
    "pt_frames": n_pt,
    "csv_rows": len(body),
    "parquet_rows": table.num_rows,
    "parquet_columns": table.num_columns,
    "t_ns_type": str(table.schema.field("t_ns").type),
    "speed_unit": units.get("vehicle.speed [m/s]"),
    "mismatches": mismatches,
    "long_rows": long.num_rows,
    "long_speed_rows": long_speed,
    "long_derived_rows": long_derived,
}))
