"""The C firmware detector's host throughput, in channel-frames per second, against the Python engines.

Three ways over the same synthetic readings (bench_engine's: noise, drift, touches), all checked to find
the same events: the C library alone in a C loop (`pt_detect_frame` over every frame, compiled with
`cc -O2`: what the detector itself costs), the C library through its Python binding as `replay --engine
firmware` runs it (blocks of 256 frames; deltas and states copied out every frame), and padtune's Python
fast engine (`processing.engine.Engine`) and plain reference (`PlainEngine`). Ratios are against the fast
engine and against what a 115200-baud link carries. No targets: the numbers say how much room there is.
`--quick` runs small sizes and prints the same lines.
"""

from __future__ import annotations

import argparse
import pathlib
import subprocess
import sys
import tempfile
import time

import numpy as np

ROOT = pathlib.Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from devices.firmware import clib  # noqa: E402
from processing.engine import Engine  # noqa: E402
from processing.reference import PlainEngine  # noqa: E402
from processing.settings import ChannelSettings  # noqa: E402
from protocol.events import FrameBlock  # noqa: E402
from tests.benchmarks.bench_engine import BLOCK_FRAMES, synthetic  # noqa: E402

LOOP_C = r"""
#include <stdio.h>
#include <stdlib.h>
#include <time.h>
#include "pt_detect.h"

int main(int argc, char **argv)
{
    long frames = atol(argv[1]), channels = atol(argv[2]), repeats = atol(argv[3]);
    int32_t *r = malloc(sizeof(int32_t) * (size_t)(frames * channels));
    pt_settings_t *s = malloc(sizeof(pt_settings_t) * (size_t)channels);
    pt_chan_t *chans = malloc(sizeof(pt_chan_t) * (size_t)channels);
    pt_event_t *ev = malloc(sizeof(pt_event_t) * (size_t)channels);
    pt_settings_t one = {100, 15, 0, 16, 3, 3, 6, 2, 1};
    FILE *in = fopen(argv[4], "rb");
    double best = 1e30;
    long k, f, c, events = 0;
    if (!r || !s || !chans || !ev || !in || fread(r, sizeof(int32_t), (size_t)(frames * channels), in)
        != (size_t)(frames * channels))
        return 2;
    for (c = 0; c < channels; c++)
        s[c] = one;
    for (k = 0; k < repeats; k++) {
        clock_t t0 = clock();
        pt_detector_t det;
        events = 0;
        pt_detect_init(&det, s, chans, (uint16_t)channels);
        for (f = 0; f < frames; f++)
            events += (long)pt_detect_frame(&det, r + f * channels, ev);
        {
            double t = (double)(clock() - t0) / CLOCKS_PER_SEC;
            if (t < best)
                best = t;
        }
    }
    printf("%.9f %ld\n", best, events);
    return 0;
}
"""


def c_loop(readings: np.ndarray, repeats: int) -> tuple[float, int]:
    """Seconds for the C loop over all frames (best of `repeats`) and the events it found."""
    fw = ROOT / "devices" / "firmware"
    with tempfile.TemporaryDirectory(prefix="pt-bench-") as tmp:
        work = pathlib.Path(tmp)
        (work / "loop.c").write_text(LOOP_C)
        readings.astype("<i4").tofile(work / "r.bin")
        subprocess.run(
            [
                "cc",
                "-std=c99",
                "-O2",
                f"-I{fw}",
                str(fw / "pt_detect.c"),
                str(work / "loop.c"),
                "-o",
                str(work / "loop"),
            ],
            check=True,
        )
        out = subprocess.run(
            [
                str(work / "loop"),
                str(len(readings)),
                str(readings.shape[1]),
                str(repeats),
                str(work / "r.bin"),
            ],
            capture_output=True,
            text=True,
            check=True,
        ).stdout.split()
    return float(out[0]), int(out[1])


def engine_run(make, readings: np.ndarray, repeats: int) -> tuple[float, list]:
    best, events = float("inf"), []
    t_s = np.arange(len(readings)) / 100.0
    seq = np.arange(len(readings))
    for _ in range(repeats):
        e = make()
        events = []
        start = time.perf_counter()
        for pos in range(0, len(readings), BLOCK_FRAMES):
            stop = pos + BLOCK_FRAMES
            events += e.process(FrameBlock(t_s[pos:stop], seq[pos:stop], readings[pos:stop], pos))
        best = min(best, time.perf_counter() - start)
    return best, events


class Binding:
    """The binding with the Engine's process(block) shape (events as (frame, channel, kind) only)."""

    def __init__(self, channels: int) -> None:
        self.det = clib.FirmwareDetector([ChannelSettings()] * channels, [1] * channels)

    def process(self, block: FrameBlock) -> list:
        return [(block.first_index + e.row, e.source, e.kind) for e in self.det.run(block.readings)]


def key(ev) -> tuple:
    return (ev.index, ev.channel, type(ev).__name__)


def compare(channels: int, frames: int, repeats: int) -> None:
    readings = synthetic(frames, channels)
    cells = frames * channels
    t_c, n_c = c_loop(readings, repeats)
    t_b, ev_b = engine_run(lambda: Binding(channels), readings, repeats)
    t_f, ev_f = engine_run(
        lambda: Engine(channels, [ChannelSettings()] * channels, [1] * channels), readings, repeats
    )
    t_p, _ = engine_run(
        lambda: PlainEngine(channels, [ChannelSettings()] * channels, [1] * channels),
        readings[: max(BLOCK_FRAMES, frames // 10)],
        1,
    )
    cells_p = max(BLOCK_FRAMES, frames // 10) * channels
    kinds = {
        "Touch": clib.TOUCH,
        "Release": clib.RELEASE,
        "StuckRelease": clib.STUCK,
        "Rebaselined": clib.REBASELINED,
    }
    same = [(e.index, e.channel, kinds[type(e).__name__]) for e in ev_f] == ev_b and n_c == len(ev_b)
    link = 115200 / 10 / (channels * 6 + 10) * channels  # channel-frames/s a 115200-baud link carries
    print(f"{channels:4d} channels x {frames:,} frames ({len(ev_f)} events, identical: {same}):")
    print(
        f"     C loop      {cells / t_c:14,.0f} channel-frames/s: {t_f / t_c:8.1f}x the Python fast engine, "
        f"{cells / t_c / link:,.0f}x a 115200-baud link"
    )
    print(f"     C binding   {cells / t_b:14,.0f} channel-frames/s: {t_f / t_b:8.1f}x the Python fast engine")
    print(
        f"     Python fast {cells / t_f:14,.0f} channel-frames/s; plain {cells_p / t_p:,.0f} "
        "channel-frames/s: "
        f"C loop {cells / t_c / (cells_p / t_p):,.0f}x plain"
    )
    if not same:
        raise SystemExit("the C library and the Python engine disagree")


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="small sizes, a few seconds")
    args = ap.parse_args()
    try:
        clib.check_available()
    except clib.FirmwareUnavailable as exc:
        print(f"bench_firmware: {exc} (0x: nothing measured)")
        return 0
    repeats = 1 if args.quick else 3
    sizes = {16: 4_000, 64: 2_000} if args.quick else {16: 100_000, 64: 40_000, 256: 10_000}
    for channels, frames in sizes.items():
        compare(channels, frames, repeats)
    return 0


if __name__ == "__main__":
    sys.exit(main())
