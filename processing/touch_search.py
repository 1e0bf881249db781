"""Where each key was touched in a recording, found by passes over its deltas, in bounded memory.

The rule is that of the whole-array `find_touches` (tests/processing/tune_reference.py), and so are the
answers (the tests hold them equal): touches from the
recording's marks when it has touch marks; without, each key's touched stretches are the frames well above
its untouched spread, judged from the median, the MAD and the 99.5th percentile of its whole delta trace.
Those three are exact order statistics of a trace that is never held: `processing.order_stats` finds them
over a few passes (`Baselines.key_values`). The runs above the level are followed across pieces.
The result is ranges, not masks (`processing.frame_ranges`): each key's touches, the same trimmed of the
finger's arrival and departure, and the quiet frames (far from any key's touch, or the quiet marks).
Pure numpy, no I/O.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from processing import frame_ranges
from processing.baseline_stream import Baselines
from processing.frame_ranges import Ranges
from processing.order_stats import median_from, median_ranks, percentile_from, percentile_ranks, select
from processing.recording_format import Mark
from processing.stretches import mark_ranges, marked_stretches

MAD_TO_SIGMA = 1.4826  # MAD to sigma for normal noise (NIST/SEMATECH e-Handbook, 1.3.5.6)
TOP_PERCENT = 99.5


@dataclass(frozen=True)
class Touches:
    """Each key's touches (`stretches`: [start, stop) as found or marked; `touched`: the same trimmed of
    the finger's arrival and departure, normalised), the `quiet` frames every key's noise is taken over,
    and whether the touches came from marks."""

    stretches: list[Ranges]
    touched: list[Ranges]
    quiet: Ranges
    from_marks: bool


@dataclass(frozen=True, slots=True)
class Spread:
    """One key's delta trace in three numbers: median, MAD-based spread (counts, at least 0.5), 99.5th
    percentile; and the level a touch must pass (None: nothing stands out of the noise)."""

    centre: float
    spread: float
    top: float

    @property
    def level(self) -> float | None:
        if self.top - self.centre < 10 * self.spread:
            return None  # nothing stands out of the noise
        return max(self.centre + 8 * self.spread, self.centre + 0.4 * (self.top - self.centre))


def spreads(b: Baselines, **select_kw: int) -> list[Spread]:
    """Every key's `Spread`, exactly as `_find_runs` computes it on the whole trace (two selections)."""
    n, width = b.frames, b.width
    mid, top = median_ranks(n), percentile_ranks(n, TOP_PERCENT)
    found = select(b.key_values(), [n] * width, [mid + top] * width, **select_kw)
    centres = [median_from(n, v[:len(mid)]) for v in found]
    tops = [percentile_from(n, TOP_PERCENT, v[len(mid):]) for v in found]
    away = b.key_values(lambda key, d, _start: np.abs(d - centres[key]))
    mads = [median_from(n, v) for v in select(away, [n] * width, [mid] * width, **select_kw)]
    return [Spread(centres[c], max(mads[c] * MAD_TO_SIGMA, 0.5), tops[c]) for c in range(width)]


class RunFollower:
    """The True runs of a mask fed a piece at a time (a run may cross any number of cuts), those shorter
    than `shortest` frames let go as soon as they end (a noisy key's one-frame spikes are not held)."""

    def __init__(self, shortest: int = 1) -> None:
        self.shortest = shortest
        self.runs: Ranges = []

    def feed(self, start: int, mask: np.ndarray) -> None:
        for a, b in frame_ranges.from_mask(mask, start):
            if self.runs and self.runs[-1][1] == a:  # the run of the last piece goes on
                self.runs[-1] = (self.runs[-1][0], b)
                continue
            self._close_last()
            self.runs.append((a, b))

    def finish(self) -> Ranges:
        self._close_last()
        return self.runs

    def _close_last(self) -> None:
        if self.runs and self.runs[-1][1] - self.runs[-1][0] < self.shortest:
            self.runs.pop()


def runs_above(b: Baselines, levels: Sequence[float | None], shortest: int = 1) -> list[Ranges]:
    """Each key's runs of frames with delta above its level, at least `shortest` frames long (none for a
    key without a level): one pass."""
    keys = [c for c, level in enumerate(levels) if level is not None]
    followers = {c: RunFollower(shortest) for c in keys}
    if keys:
        for start, d in b.passes(keys):
            for i, c in enumerate(keys):
                followers[c].feed(start, d[:, i] > levels[c])
    return [followers[c].finish() if c in followers else [] for c in range(len(levels))]


def shortest_touch(rate_hz: float, min_touch_s: float) -> int:
    """Frames a run above the level must last to count as a touch (at least 2)."""
    return max(2, round(min_touch_s * rate_hz))


def touches_of(runs: Ranges, rate_hz: float, min_touch_s: float) -> Ranges:
    """Runs at least `min_touch_s` long, those closer than 50 ms joined (as `_find_runs`)."""
    shortest = shortest_touch(rate_hz, min_touch_s)
    merged: Ranges = []
    gap = max(1, round(0.05 * rate_hz))
    for a, b in runs:
        if b - a < shortest:
            continue
        if merged and a - merged[-1][1] <= gap:
            merged[-1] = (merged[-1][0], b)
        else:
            merged.append((a, b))
    return merged


def trimmed(runs: Ranges, trim: int) -> Ranges:
    """Each touch without the finger's arrival and departure (at most a fifth of each side)."""
    cut = [(a + min(trim, (b - a) // 5), b - min(trim, (b - a) // 5)) for a, b in runs]
    return frame_ranges.normalised(cut)


def find_touches_streaming(b: Baselines, names: Sequence[str], rate_hz: float, marks: Sequence[Mark] = (),
                           min_touch_s: float = 0.1, **select_kw: int) -> Touches:
    """Every key's touches and the quiet frames (see the module's docstring)."""
    n, width = b.frames, b.width
    to_frames = b.source.times_to_frames
    marked = marked_stretches(marks, names, to_frames)
    if marked is not None:
        found = [marked[c] for c in range(width)]
    else:
        levels = [s.level for s in spreads(b, **select_kw)]
        shortest = shortest_touch(rate_hz, min_touch_s)
        found = [touches_of(runs, rate_hz, min_touch_s) for runs in runs_above(b, levels, shortest)]
    trim = max(1, round(0.05 * rate_hz))
    guard = max(1, round(0.3 * rate_hz))  # any key touched, widened by a guard, is no use for noise
    quiet = frame_ranges.complement(frame_ranges.widened([r for runs in found for r in runs], guard, n), n)
    if marked is not None and (q := mark_ranges(marks, "quiet-start", "quiet-end", None, to_frames)):
        quiet = frame_ranges.normalised(q, n)
    return Touches(found, [trimmed(runs, trim) for runs in found], quiet, marked is not None)
