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


def interpolate(x: np.ndarray, xp: np.ndarray, fp: np.ndarray) -> np.ndarray:
    """`np.interp(x, xp, fp[:, k])` for every column k at once, bit for bit: numpy's own steps (its
    compiled `interp`: the interval by bisection, slope = (fp[j+1] - fp[j]) / (xp[j+1] - xp[j]), value =
    slope * (x - xp[j]) + fp[j]; fp[0] left of xp[0], fp[-1] at and right of xp[-1]) over a 2-D `fp`.
    `xp` strictly increasing, at least two points, finite values."""
    j = np.clip(np.searchsorted(xp, x, side="right") - 1, 0, len(xp) - 2)
    slope = (fp[1:] - fp[:-1]) / (xp[1:] - xp[:-1])[:, None]
    out = slope[j] * (x - xp[j])[:, None] + fp[j]
    out[x < xp[0]] = fp[0]
    out[x >= xp[-1]] = fp[-1]
    at = x == xp[j]  # a frame on a point takes the point's value (numpy's rule: no 0 * slope)
    out[at] = fp[j[at]]
    return out


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

    def baseline(self, start: int, stop: int, keys: Sequence[int] | None = None) -> np.ndarray:
        """Frames x keys baselines at frames [start, stop) (every key, or `keys` in that order), each what
        `np.interp(frames, centres, low)` of all the points gives (`interpolate`)."""
        centres, low = self.points(start, stop)
        low = low if keys is None else low[:, list(keys)]
        if len(self.low) > 1:
            return interpolate(np.arange(start, stop, dtype=np.float64), centres, low)
        return np.broadcast_to(low[0] if len(low) else np.zeros(low.shape[1]), (stop - start, low.shape[1]))

    def deltas(self, start: int, readings: np.ndarray, keys: Sequence[int] | None = None) -> np.ndarray:
        """Frames x keys deltas (float64, touch positive) of readings whose first frame is `start`; with
        `keys`, only those keys' columns, in that order. + 0.0: a delta is never -0.0 (a zero reading of a
        falling key less a zero baseline), so a median of zeros never depends on where a partition put it."""
        cols = readings if keys is None else readings[:, list(keys)]
        sign = self.sign if keys is None else self.sign[list(keys)]
        v = cols.astype(np.float64) * sign.astype(np.float64)
        return v - self.baseline(start, start + len(readings), keys) + 0.0

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
