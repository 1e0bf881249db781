"""Each key's untouched and touched samples summed up by passes over its deltas: what a suggestion and the
figures need (`processing.suggest.Samples`), and the two runs the debounces span, without holding a trace.

A key's untouched samples are its deltas in the quiet frames, its touched samples its deltas in its
trimmed touches, each rounded to whole counts (`np.rint`), in frame order, exactly as `tune` took them from
whole arrays. Count, lowest and highest are exact; the median is exact (`processing.order_stats`); the RMS
(population standard deviation) is taken in two steps, the mean from the exact integer sum and then the
summed squares about it (a compensated running sum over the pieces: `processing.running_sum`), which
agrees with `numpy.std` of the whole to about 1e-15. The longest noise burst and the longest dropout are
runs over the samples in frame order, followed across pieces (a run goes on across the frames between two
quiet stretches, as it did in the joined array).
Pure numpy, no I/O.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field

import numpy as np

from processing import frame_ranges
from processing.baseline_stream import Baselines
from processing.frame_ranges import Ranges
from processing.order_stats import median_from, median_ranks, select
from processing.running_sum import RunningSum
from processing.suggest import Levels, Samples


@dataclass
class _Sums:
    count: int = 0
    low: int | None = None
    high: int | None = None
    total: int = 0  # exact integer sum
    squares: RunningSum = field(default_factory=RunningSum)  # summed squares about the mean

    def add(self, v: np.ndarray) -> None:
        if len(v):
            self.count += len(v)
            lo, hi = int(v.min()), int(v.max())
            self.low = lo if self.low is None else min(self.low, lo)
            self.high = hi if self.high is None else max(self.high, hi)
            self.total += int(v.sum(dtype=np.int64))  # |v| < 2^34: no overflow

    @property
    def mean(self) -> float:
        return self.total / self.count if self.count else 0.0  # the exact sum divided: correctly rounded

    def samples(self, median: float) -> Samples:
        rms = math.sqrt(max(0.0, self.squares.value) / self.count) if self.count else 0.0
        return Samples(self.count, 0 if self.low is None else self.low, 0 if self.high is None else self.high,
                       rms, median)


def _rounded(d: np.ndarray) -> np.ndarray:
    return np.rint(d).astype(np.int64)


class KeySamples:
    """Every key's untouched (`quiet`, the same frames for every key) and touched (`touched[c]`) samples."""

    def __init__(self, b: Baselines, quiet: Ranges, touched: Sequence[Ranges]) -> None:
        self.b = b
        self.quiet = quiet
        self.touched = list(touched)
        self.width = len(self.touched)

    def _ranges(self, which: int, key: int) -> Ranges:
        return self.quiet if which == 0 else self.touched[key]

    def _each(self, visit: Callable[[int, int, np.ndarray], None]) -> None:
        """One pass: `visit(which, key, samples)` for each piece, which 0 untouched / 1 touched."""
        for start, d in self.b.passes():
            for key in range(self.width):
                col = d[:, key]
                for which in (0, 1):
                    got = frame_ranges.take(col, start, self._ranges(which, key))
                    if len(got):
                        visit(which, key, _rounded(got))

    def samples(self, **select_kw: int) -> list[tuple[Samples, Samples]]:
        """Each key's (untouched, touched) `Samples`: a pass for counts, extremes and exact sums, one for the
        squares about the mean, then the medians' selection (`processing.order_stats`)."""
        sums = [[_Sums(), _Sums()] for _ in range(self.width)]
        self._each(lambda which, key, v: sums[key][which].add(v))

        def squares(which: int, key: int, v: np.ndarray) -> None:
            s = sums[key][which]
            dev = v.astype(np.float64) - s.mean
            s.squares.add(float(np.dot(dev, dev)))

        self._each(squares)
        medians = self._medians([[s.count for s in pair] for pair in sums], **select_kw)
        return [(quiet.samples(medians[key][0]), held.samples(medians[key][1]))
                for key, (quiet, held) in enumerate(sums)]

    def _medians(self, counts: list[list[int]], **select_kw: int) -> list[list[float]]:
        """Each key's untouched and touched medians (nan with no samples), in one selection."""
        asked = [(key, which) for key in range(self.width) for which in (0, 1) if counts[key][which]]

        def passes(active: Sequence[int]) -> Iterator[dict[int, np.ndarray]]:
            keys = sorted({asked[q][0] for q in active})  # the keys still asked for, no others
            column = {key: i for i, key in enumerate(keys)}
            for start, d in self.b.passes(keys):
                out = {}
                for q in active:
                    key, which = asked[q]
                    got = frame_ranges.take(d[:, column[key]], start, self._ranges(which, key))
                    if len(got):
                        out[q] = _rounded(got).astype(np.float64)
                yield out

        wanted = [counts[key][which] for key, which in asked]
        found = select(passes, wanted, [median_ranks(n) for n in wanted], **select_kw)
        values = {kw: median_from(n, v) for kw, n, v in zip(asked, wanted, found, strict=True)}
        return [[values.get((key, which), math.nan) for which in (0, 1)] for key in range(self.width)]

    def runs(self, levels: Sequence[Levels | None]) -> list[tuple[int, int]]:
        """Each key's longest noise burst (untouched samples, `Levels.is_burst`) and longest dropout
        (touched samples below `Levels.release_level`), in frames; (0, 0) for a key without levels."""
        best = [[0, 0] for _ in range(self.width)]
        now = [[0, 0] for _ in range(self.width)]

        def follow(which: int, key: int, v: np.ndarray) -> None:
            lv = levels[key]
            if lv is None:
                return
            hit = lv.is_burst(v) if which == 0 else v < lv.release_level
            run, longest = _longest(hit, now[key][which])
            best[key][which] = max(best[key][which], longest)
            now[key][which] = run

        if any(lv is not None for lv in levels):
            self._each(follow)
        return [(b[0], b[1]) for b in best]


def _longest(hit: np.ndarray, carried: int) -> tuple[int, int]:
    """(the run still open at the end, the longest run) of True in `hit`, a run of `carried` open before."""
    if not len(hit):
        return carried, carried
    runs = frame_ranges.from_mask(hit)
    if not runs:
        return 0, carried
    lengths = [b - a for a, b in runs]
    if runs[0][0] == 0:
        lengths[0] += carried
    longest = max(max(lengths), carried)
    open_run = lengths[-1] if runs[-1][1] == len(hit) else 0
    return open_run, longest
