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

from processing.frame_source import DeltaPiece, FrameSource

WINDOW_S = 0.5  # each baseline point: the median of this long (as estimate_baseline)
SPAN_S = 6.0  # ... and the lowest of the points within this span around it


def window_frames(rate_hz: float, window_s: float = WINDOW_S) -> int:
    return max(1, round(window_s * rate_hz))


class WindowMedians:
    """Column medians of consecutive `window`-frame windows of frames x keys readings fed in any cuts."""

    def __init__(self, window: int, width: int) -> None:
        self.window = window
        self._carry = np.zeros((0, width), np.float64)
        self._out: list[np.ndarray] = []

    def feed(self, readings: np.ndarray) -> None:
        block = np.asarray(readings).astype(np.float64)
        if len(self._carry):
            block = np.concatenate([self._carry, block])
        whole = len(block) // self.window * self.window
        if whole:
            windows = block[:whole].reshape(-1, self.window, block.shape[1])
            self._out.append(np.median(windows, axis=1))
        self._carry = block[whole:].copy()

    def finish(self) -> np.ndarray:
        """Windows x keys medians (the last window as long as the frames left)."""
        if len(self._carry):
            self._out.append(np.median(self._carry, axis=0)[None, :])
            self._carry = self._carry[:0]
        width = self._carry.shape[1]
        return np.concatenate(self._out) if self._out else np.zeros((0, width))


def rolling_low(medians: np.ndarray, half: int) -> np.ndarray:
    """Each row's column-wise minimum over the rows within `half` of it (fewer at the ends)."""
    if not len(medians):
        return medians
    padded = np.pad(medians, ((half, half), (0, 0)), constant_values=np.inf)
    view = np.lib.stride_tricks.sliding_window_view(padded, 2 * half + 1, axis=0)
    return view.min(axis=-1)


@dataclass(frozen=True)
class Baselines:
    """Every key's baseline points (`low`: windows x keys, touch positive) over `frames` frames, and the
    passes over the deltas they give (`passes()`)."""

    source: FrameSource
    sign: np.ndarray  # one +1/-1 per key (int64)
    centres: np.ndarray  # each point's frame (float)
    low: np.ndarray

    @property
    def frames(self) -> int:
        return self.source.frames

    def baseline(self, start: int, stop: int, key: int) -> np.ndarray:
        """Key `key`'s baseline at frames [start, stop), as `_Knots.at_every_frame()` gives it."""
        low = self.low[:, key]
        if len(low) > 1:
            return np.interp(np.arange(start, stop), self.centres, low)
        return np.full(stop - start, low[0] if len(low) else 0.0)

    def deltas(self, start: int, readings: np.ndarray, keys: Sequence[int] | None = None) -> np.ndarray:
        """Frames x keys deltas (float64, touch positive) of readings whose first frame is `start`; with
        `keys`, only those keys' columns, in that order."""
        keys = range(readings.shape[1]) if keys is None else keys
        out = np.empty((len(readings), len(keys)), np.float64)
        stop = start + len(readings)
        for i, key in enumerate(keys):
            v = self.sign[key] * readings[:, key].astype(np.float64)
            out[:, i] = v - self.baseline(start, stop, key)
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
    medians = WindowMedians(w, source.width)
    for piece in source.pieces():
        medians.feed(piece.readings)
    return baselines_from(source, sign, medians.finish(), w, window_s, span_s)


def baselines_from(source: FrameSource, sign: np.ndarray, medians: np.ndarray, window: int,
                   window_s: float = WINDOW_S, span_s: float = SPAN_S) -> Baselines:
    """`Baselines` from raw window medians already taken (windows x keys, `window` frames each)."""
    n = source.frames
    sign = np.asarray(sign, np.int64)
    half = max(1, round(span_s / window_s / 2))
    low = rolling_low(medians * sign[None, :], half)
    centres = np.minimum(np.arange(0, n, window) + window / 2, n - 1)
    return Baselines(source, sign, centres, low)
