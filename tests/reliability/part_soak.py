"""Soak: the 64-channel simulated board (`grid64`, 1 kHz) accelerated through at least ten minutes of
board time, through the real pipeline every live front end runs: `protocol.link.Link` reading a `sim://`
port on its own thread, `tui.pipeline.Pipeline` stepping, `processing.session.Session` detecting and
measuring (rows and qualities taken as a screen would, twice a second of wall time).

Memory must stay flat: resident memory is sampled every step; its level at the end (median over the last
tenth of the board time) may exceed its level after the warm-up (median over the second tenth: rings,
histories and caches filled) by a bounded amount. The session alone over 600 s of this board stays
within 1 MiB (measured while writing this part); the rest of the bound is the allocator's slack. Board
The soak runs in a process of its own (`python -m tests.reliability.part_soak`, figures back as JSON),
so what the suite's other parts allocated before does not count. Board time is counted from the
board's own frames: those received, those the link had to drop (a machine too
busy to keep up; shown) and those lost on the way.
"""

from __future__ import annotations

import dataclasses
import json
import subprocess
import sys
import time

import devices
from processing.session import Session
from protocol.events import FrameBlock
from protocol.link import Link
from tests.reliability.figures import Figure, at_least, at_most, failed, info, rss_mib
from tests.reliability.procs import ROOT, padtune_env
from tui.pipeline import Pipeline

RATE_HZ = 1000.0  # devices/boards/grid64.toml
FULL_BOARD_S = 600.0
QUICK_BOARD_S = 40.0
SPEED = 10.0  # board seconds per second: about 10,000 frames/s of 64 channels
WARM_UP = 0.1
WALL_LIMIT_S = 300.0  # a machine that cannot do it in this long reports the board time it reached
# Every ring and history the session keeps is bounded (DEVELOPERS.md, Processing): growth after the
# warm-up is a leak. The room is for the allocator's own slack (common practice, no source).
GROWTH_BOUND_MIB = 16.0


def measure(quick: bool) -> list[Figure]:
    """The soak in this process (its RSS is the figure: call it in a process of its own)."""
    target_s = QUICK_BOARD_S if quick else FULL_BOARD_S
    devices.register_url_handlers()
    link = Link(f"sim://grid64?seed=4&speed={SPEED:g}&backlog_s=5")
    session = Session()
    pipeline = Pipeline(link, session)
    samples: list[tuple[float, float]] = []  # (board s, RSS MiB)
    last_rows = [0.0]
    through = [0]  # frames handed to the session

    def board_s() -> float:
        stats = link.stats
        return (stats.frames + stats.overflow + stats.lost) / RATE_HZ

    def on_step(step) -> None:
        through[0] += sum(len(e) for e in step.events if isinstance(e, FrameBlock))
        now = time.monotonic()
        if now - last_rows[0] >= 0.5 and session.measures is not None:  # as a screen, twice a second
            session.rows()
            session.measures.qualities()
            last_rows[0] = now
        samples.append((board_s(), rss_mib()))

    start = time.monotonic()
    link.start()
    try:
        pipeline.run(until_s=start + WALL_LIMIT_S, done=lambda: board_s() >= target_s, on_step=on_step,
                     tick_s=0.01)
    finally:
        link.stop()
    wall_s = time.monotonic() - start
    covered = board_s()
    stats = link.stats
    # Flat means no trend: the level at the end (median of the last tenth of the board time) against the
    # level just after the warm-up (median of the second tenth). A bounded buffer that fills for a moment
    # (the link's queue, when this machine is busy) is a bump, not a trend: it shows in the peak.
    def level(lo: float, hi: float) -> float:
        window = sorted(rss for t, rss in samples if covered * lo < t <= covered * hi)
        return window[len(window) // 2] if window else float("nan")

    base, end = level(WARM_UP, 2 * WARM_UP), level(1 - WARM_UP, 1.0)
    growth = end - base if base == base and end == end else float("inf")  # nan: too few samples
    peak = max((rss for t, rss in samples if t > covered * WARM_UP), default=float("nan")) - base
    return [
        at_least("soak: board time covered", round(covered, 1), target_s, "s"),
        at_most("soak: RSS growth after warm-up (end level - level after warm-up)", round(growth, 1),
                GROWTH_BOUND_MIB, "MiB"),
        info("soak: RSS after warm-up / at the end / highest above warm-up",
             f"{base:.0f}/{end:.0f}/{peak:+.0f}", "MiB"),
        info("soak: frames through the session", through[0]),
        info("soak: frames dropped (consumer behind) / lost", f"{stats.overflow}/{stats.lost}"),
        info("soak: wall time", round(wall_s, 1), "s"),
    ]


def run(quick: bool) -> list[Figure]:
    """The soak in a fresh process: what other parts of the suite allocated before must not count."""
    argv = [sys.executable, "-m", "tests.reliability.part_soak", *(["--quick"] if quick else [])]
    done = subprocess.run(argv, cwd=ROOT, env=padtune_env(), capture_output=True, text=True,
                          timeout=WALL_LIMIT_S + 120)
    try:
        return [Figure(**fields) for fields in json.loads(done.stdout.strip().splitlines()[-1])]
    except (ValueError, IndexError, TypeError):
        return [failed("soak: ran", f"exit {done.returncode}: {done.stderr.strip()[-300:]}")]


if __name__ == "__main__":
    print(json.dumps([dataclasses.asdict(f) for f in measure("--quick" in sys.argv)]))
