"""Noise/SNR for every channel: `Measures.qualities()` (one pass over all channels) against the
per-channel loop `[m.quality(c) for c in ...]`, same process, same measures.

The live screen asks for all channels twice a second; the case is a 64-channel 1 kHz board (2 s
window = 2000 frames a channel), with every window full, and with half the channels re-baselined a
second ago (windows half full: the path that blanks unfilled rows). Prints the time per call, the
ratio, and the share of one core at two calls a second. `--quick`: fewer repeats, the same lines.
"""

from __future__ import annotations

import argparse
import pathlib
import sys
import time

import numpy as np

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parents[2]))

from processing.detections import KeyState
from processing.measure import Measures

CALLS_PER_S = 2.0


def filled(channels: int, rate_hz: float, seconds: float, part_full: bool) -> Measures:
    rng = np.random.default_rng(7)
    m = Measures(channels, rate_hz=rate_hz, window_s=2.0, history_frames=8192)
    block = 50
    frames = int(seconds * rate_hz)
    for pos in range(0, frames, block):
        deltas = rng.integers(-7, 8, (block, channels))
        states = np.zeros((block, channels), np.int8)
        if (pos // block) % 40 == 5:  # a touch on a few keys now and then
            states[:, ::7] = KeyState.TOUCHED
            deltas[:, ::7] += 300
        restart = None
        if part_full and pos == frames - int(rate_hz):
            restart = {c: 0 for c in range(0, channels, 2)}  # re-baselined 1 s ago: windows half full
        m.ingest((pos + np.arange(block)) / rate_hz, 2000 + deltas, deltas, states, restart=restart)
    return m


def best_time(fn, repeats: int) -> float:
    """Least wall time of `repeats` calls (the machine is shared: the least is the code's own cost)."""
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


def compare(channels: int, part_full: bool, repeats: int) -> None:
    m = filled(channels, 1000.0, 4.0, part_full)
    fast = m.qualities()
    slow = [m.quality(c) for c in range(channels)]
    same = all(a.verdict == b.verdict and a.snr_pp == b.snr_pp and
               (a.noise is None) == (b.noise is None) for a, b in zip(fast, slow, strict=True))
    t_fast = best_time(m.qualities, repeats)
    t_loop = best_time(lambda: [m.quality(c) for c in range(channels)], repeats)
    case = "half the windows half full" if part_full else "all windows full"
    print(f"{channels} channels at 1 kHz, {case}: qualities() {1e3 * t_fast:.2f} ms per call, per-channel "
          f"loop {1e3 * t_loop:.2f} ms: {t_loop / t_fast:.1f}x the loop; at {CALLS_PER_S:g} calls/s "
          f"{100 * CALLS_PER_S * t_fast:.2f} % of a core (same verdicts and SNR: {same})")
    if not same:
        raise SystemExit("qualities() and quality(c) disagree")


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="fewer repeats, a few seconds")
    args = ap.parse_args()
    repeats = 5 if args.quick else 50
    for channels in (64, 256) if not args.quick else (64,):
        compare(channels, part_full=False, repeats=repeats)
        compare(channels, part_full=True, repeats=repeats)
    return 0


if __name__ == "__main__":
    sys.exit(main())
