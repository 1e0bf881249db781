"""Recording throughput: writing and reading padtune CSV recordings of a 64-channel board.

Prints frames/s of `processing.recording.RecordingWriter` and of `read_recording` as ratios, measured
in this one run, to
- the frame rate of a 64-channel board at 1 kHz (the fastest board padtune expects: the writer must
  keep up with it many times over, as it shares the UI thread), and
- a plain stdlib `csv` loop (one `writerow` per frame; `csv.reader` with `int()` per cell) run in the
  same process on the same frames.
It checks that what is read back equals what was written. Best of a few repeats; never a pass/fail
on time.

    python tests/benchmarks/bench_recording.py [--quick]
"""

from __future__ import annotations

import argparse
import csv
import pathlib
import sys
import tempfile
import time

import numpy as np

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[2]))

from processing.recording import RecordingWriter, read_recording
from protocol.events import FrameBlock

BOARD_FPS = 1000.0  # a 64-channel board at 1 kHz
CHANNELS = 64


def blocks(frames: int, per_block: int = 50, seed: int = 3) -> list[FrameBlock]:
    """Blocks as the link hands them over (about one screen frame's worth each)."""
    rng = np.random.default_rng(seed)
    readings = rng.integers(900, 32000, size=CHANNELS) + rng.integers(-8, 9, size=(frames, CHANNELS))
    out = []
    for start in range(0, frames, per_block):
        stop = min(frames, start + per_block)
        out.append(FrameBlock(np.arange(start, stop) / BOARD_FPS, np.arange(start, stop) % 65536,
                              readings[start:stop].astype(np.int64), start))
    return out


def best(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="small sizes (a few seconds)")
    args = ap.parse_args()
    frames = 4_000 if args.quick else 100_000
    repeats = 2 if args.quick else 3
    data = blocks(frames)
    folder = pathlib.Path(tempfile.mkdtemp(prefix="padtune-bench-"))
    ours, plain = folder / "ours.csv", folder / "plain.csv"

    def write_ours() -> None:
        with RecordingWriter(ours, origin_t_s=0.0, overwrite=True) as w:
            for b in data:
                w.write_events([b])

    def write_plain() -> None:
        with open(plain, "w", newline="") as f:
            out = csv.writer(f)
            out.writerow(["t_s", "seq", *(f"ch{i}" for i in range(CHANNELS))])
            for b in data:
                for t, s, row in zip(b.t_s.tolist(), b.seq.tolist(), b.readings.tolist(), strict=True):
                    out.writerow([f"{t:.6f}", s, *row])

    def read_ours() -> None:
        read_recording(ours)

    def read_plain() -> None:
        with open(plain, newline="") as f:
            rows = csv.reader(f)
            next(rows)
            [[int(c) for c in r[1:]] for r in rows]

    w_ours, w_plain = best(write_ours, repeats), best(write_plain, repeats)
    r_ours, r_plain = best(read_ours, repeats), best(read_plain, repeats)
    back = read_recording(ours).arrays()[2]
    assert np.array_equal(back, np.concatenate([b.readings for b in data])), "read back differs"
    for what, ours_s, plain_s in (("write", w_ours, w_plain), ("read", r_ours, r_plain)):
        fps = frames / ours_s
        print(f"{what} {CHANNELS} ch: {fps:,.0f} frames/s = {fps / BOARD_FPS:.1f}x a 1 kHz board, "
              f"{plain_s / ours_s:.2f}x the plain csv loop ({frames / plain_s:,.0f} frames/s)")
    for p in (ours, plain):
        p.unlink()
    folder.rmdir()
    return 0


if __name__ == "__main__":
    sys.exit(main())
