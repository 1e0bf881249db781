"""Every key's drift-following baseline and delta, worked out a piece at a time from a `FrameSource`.

The baseline is the one `processing.stretches.estimate_baseline` draws (a rolling minimum of half-second
medians, interpolated back to every frame), and the deltas are bit for bit those of
`processing.stretches.find_touches`, but nothing frames-long is held: one pass takes every key's window
medians (two numbers a second per key: the baseline's points), and `Baselines.passes()` then works the
deltas out again for each pass a computation needs. A window's median is taken of the raw readings and
the key's sign applied after: the median of negated values is the negated median, exactly (IEEE
negation is exact, and the mean of the two middle values is symmetric).
Pure numpy, no I/O.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass

import numpy as np

from processing.frame_source import DeltaPiece, FrameSource, RowStore

WINDOW_S = 0.5  # each baseline point: the median of this long (as estimate_baseline)
SPAN_S = 6.0  # ... and the lowest of the points within this span around it


def window_frames(rate_hz: float, window_s: float = WINDOW_S) -> int:
    return max(1, round(window_s * rate_hz))


ROWS_AT_ONCE = 4096  # baseline points worked on at a time (the rolling minimum's blocks)


class WindowMedians:
    """Column medians of consecutive `window`-frame windows of frames x keys readings fed in any cuts,
    appended to `out` (a `RowStore`) as they are taken."""

    def __init__(self, window: int, out: RowStore) -> None:
        self.window = window
        self.out = out
        self._carry = np.zeros((0, out.width), np.float64)

    def feed(self, readings: np.ndarray) -> None:
        block = np.asarray(readings).astype(np.float64)
        if len(self._carry):
            block = np.concatenate([self._carry, block])
        whole = len(block) // self.window * self.window
        if whole:
            windows = block[:whole].reshape(-1, self.window, block.shape[1])
            self.out.append(np.median(windows, axis=1))
        self._carry = block[whole:].copy()

    def finish(self) -> RowStore:
        """The store: windows x keys medians (the last window as long as the frames left)."""
        if len(self._carry):
            self.out.append(np.median(self._carry, axis=0)[None, :])
            self._carry = self._carry[:0]
        return self.out


def rolling_low_rows(medians: RowStore, sign: np.ndarray, half: int, out: RowStore) -> RowStore:
    """Each row of `medians * sign`, column by column, replaced by the lowest of the rows within `half` of
    it (fewer at the ends), a block of rows at a time, into `out`."""
    n = len(medians)
    for a in range(0, n, ROWS_AT_ONCE):
        b = min(a + ROWS_AT_ONCE, n)
        lo, hi = max(0, a - half), min(n, b + half)
        rows = medians.read(lo, hi) * sign[None, :]
        pad = ((half - (a - lo), half - (hi - b)), (0, 0))  # inf only past the true ends
        view = np.lib.stride_tricks.sliding_window_view(np.pad(rows, pad, constant_values=np.inf),
                                                        2 * half + 1, axis=0)
        out.append(view.min(axis=-1))
    return out


@dataclass(frozen=True)
class Baselines:
    """Every key's baseline points (`low`: windows x keys, touch positive, one every `window` frames, in a
    `RowStore` where the frames are) and the passes over the deltas they give (`passes()`)."""

    source: FrameSource
    sign: np.ndarray  # one +1/-1 per key (int64)
    window: int
    low: RowStore

    @property
    def frames(self) -> int:
        return self.source.frames

    @property
    def width(self) -> int:
        return len(self.sign)

    def points(self, start: int, stop: int) -> tuple[np.ndarray, np.ndarray]:
        """(frames, lows) of the points whose stretches cover frames [start, stop), one more each side:
        interpolating between these gives what interpolating between all of them gives (`np.interp` takes
        each frame from the two points around it)."""
        n, w, count = self.frames, self.window, len(self.low)
        first = min(max(0, (start - w // 2) // w - 1), max(0, count - 1))
        last = min(count - 1, max(0, -(-(stop - 1 - w // 2) // w) + 1))
        at = np.arange(first, last + 1)
        return np.minimum(at * w + w / 2, n - 1), self.low.read(first, last + 1)

    def baseline(self, start: int, stop: int, key: int,
                 points: tuple[np.ndarray, np.ndarray] | None = None) -> np.ndarray:
        """Key `key`'s baseline at frames [start, stop), as `_Knots.at_every_frame()` gives it."""
        centres, low = points if points is not None else self.points(start, stop)
        if len(self.low) > 1:
            return np.interp(np.arange(start, stop), centres, low[:, key])
        return np.full(stop - start, low[0, key] if len(low) else 0.0)

    def deltas(self, start: int, readings: np.ndarray, keys: Sequence[int] | None = None) -> np.ndarray:
        """Frames x keys deltas (float64, touch positive) of readings whose first frame is `start`; with
        `keys`, only those keys' columns, in that order."""
        keys = range(readings.shape[1]) if keys is None else keys
        out = np.empty((len(readings), len(keys)), np.float64)
        stop = start + len(readings)
        points = self.points(start, stop)
        for i, key in enumerate(keys):
            v = self.sign[key] * readings[:, key].astype(np.float64)
            out[:, i] = v - self.baseline(start, stop, key, points) + 0.0  # never -0.0 (see `_KeyDelta`)
        return out
    def passes(self, keys: Sequence[int] | None = None) -> Iterator[DeltaPiece]:
        """A fresh pass over every key's delta (or only `keys`' columns), a piece at a time: called with
        no argument, a `DeltaPasses`."""
        for piece in self.source.pieces():
            yield piece.start, self.deltas(piece.start, piece.readings, keys)

    def key_values(self, transform: Callable[[int, np.ndarray, int], np.ndarray] | None = None
                   ) -> Callable[[Sequence[int]], Iterator[dict[int, np.ndarray]]]:
        """Passes in the form `processing.order_stats.select` takes: each key asked for -> its deltas in
        the piece (through `transform(key, deltas, first frame)` when given: |delta - centre|, ...)."""
        def passes(active: Sequence[int]) -> Iterator[dict[int, np.ndarray]]:
            keys = list(active)
            for start, d in self.passes(keys):
                cols = {k: d[:, i] for i, k in enumerate(keys)}
                if transform is not None:
                    cols = {k: transform(k, v, start) for k, v in cols.items()}
                yield cols
        return passes


def baselines(source: FrameSource, sign: np.ndarray, rate_hz: float, window_s: float = WINDOW_S,
              span_s: float = SPAN_S) -> Baselines:
    """One pass over `source` for every key's baseline points (see the module's docstring)."""
    w = window_frames(rate_hz, window_s)
    medians = WindowMedians(w, source.rows(source.width))
    for piece in source.pieces():
        medians.feed(piece.readings)
    return baselines_from(source, sign, medians.finish(), w, window_s, span_s)


def baselines_from(source: FrameSource, sign: np.ndarray, medians: RowStore, window: int,
                   window_s: float = WINDOW_S, span_s: float = SPAN_S) -> Baselines:
    """`Baselines` from raw window medians already taken (windows x keys, `window` frames each)."""
    sign = np.asarray(sign, np.int64)
    half = max(1, round(span_s / window_s / 2))
    low = rolling_low_rows(medians, sign, half, source.rows(medians.width))
    return Baselines(source, sign, window, low)
