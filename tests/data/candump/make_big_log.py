"""Writes big.log: 20 000 candump -L lines from a fixed seed, for
tests/crosscheck_python_can.py. Run from this directory:
`python3 make_big_log.py` (the output is the same byte for byte every run).

Standard and extended data frames (0-8 bytes), remote frames (with and
without a length digit) and CAN FD frames (flags 0-7, every FD length), on
three interfaces, with increasing six-digit timestamps. Only syntax both
readers agree on: no error frames, '.' separators or hex flag digits A-F
(kinds.log covers those).
"""

import random
from pathlib import Path

SEED = 20240611
FRAMES = 20_000
FD_LENGTHS = [0, 1, 2, 3, 4, 5, 6, 7, 8, 12, 16, 20, 24, 32, 48, 64]


def frame(rng: random.Random) -> str:
    r = rng.random()
    extended = rng.random() < 0.3
    can_id = f"{rng.randrange(1 << 29):08X}" if extended else f"{rng.randrange(0x800):03X}"
    if r < 0.08:
        dlc = rng.randrange(9)
        return f"{can_id}#R" + (str(dlc) if rng.random() < 0.5 else "")
    if r < 0.20:
        length = rng.choice(FD_LENGTHS)
        flags = rng.randrange(8)
        return f"{can_id}##{flags:X}" + rng.randbytes(length).hex().upper()
    return f"{can_id}#" + rng.randbytes(rng.randrange(9)).hex().upper()


def main() -> None:
    rng = random.Random(SEED)
    t_us = 1_700_000_000_000_000
    out = []
    for _ in range(FRAMES):
        t_us += rng.randrange(1, 2000)
        iface = rng.choice(["can0", "can0", "can1", "vcan0"])
        out.append(f"({t_us // 1_000_000}.{t_us % 1_000_000:06d}) {iface} {frame(rng)}\n")
    with open(Path(__file__).with_name("big.log"), "w", encoding="ascii", newline="\n") as f:
        f.write("".join(out))


if __name__ == "__main__":
    main()
