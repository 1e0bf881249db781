"""The long view's history: every channel's reading and baseline over the whole session, decimated and
bounded; pure (numpy, no I/O, no clock of its own).

Frames fall into buckets of `span` frames; each bucket keeps the lowest and highest reading and baseline
of its frames (so a one-frame spike survives any decimation) and the host time of its first and last
frame. When all `capacity` buckets are full, neighbours are merged in pairs and `span` doubles: the
buckets always cover the whole session, from a frame each at the start to about a session's length /
(capacity / 2) each later on. Memory is fixed at construction (`nbytes`): for `capacity` buckets and C
channels, 4 x capacity x C float32 values plus 2 x capacity float64 times; 1024 buckets of 64 channels
are 1.0 MiB whatever the session's length. Appending is O(1) amortised per frame (a merge touches every
bucket once per doubling of the session).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

DEFAULT_BUCKETS = 1024


@dataclass(frozen=True, slots=True)
class LongSeries:
    """One channel's decimated history, oldest first: per bucket the time of its first and last frame
    (host seconds) and the lowest and highest reading and baseline (counts)."""

    t_first_s: np.ndarray
    t_last_s: np.ndarray
    reading_min: np.ndarray
    reading_max: np.ndarray
    baseline_min: np.ndarray
    baseline_max: np.ndarray
    span_frames: int  # frames per bucket (the newest bucket may hold fewer)

    def __len__(self) -> int:
        return len(self.t_first_s)


class LongHistory:
    """Min/max per bucket of reading and baseline for `channels` channels, in `capacity` buckets."""

    def __init__(self, channels: int, capacity: int = DEFAULT_BUCKETS) -> None:
        if capacity < 2 or capacity % 2:
            raise ValueError(f"capacity must be an even number of at least 2 buckets, not {capacity}")
        self.channels, self.capacity = channels, capacity
        shape = (capacity, channels)
        self._rmin = np.empty(shape, np.float32)
        self._rmax = np.empty(shape, np.float32)
        self._bmin = np.empty(shape, np.float32)
        self._bmax = np.empty(shape, np.float32)
        self._t0 = np.empty(capacity, np.float64)
        self._t1 = np.empty(capacity, np.float64)
        self.span = 1  # frames per bucket
        self._closed = 0  # full buckets
        self._open = 0  # frames in the bucket being filled (index `_closed`)
        self.frames = 0

    @property
    def nbytes(self) -> int:
        """The memory the buckets hold (fixed at construction)."""
        arrays = (self._rmin, self._rmax, self._bmin, self._bmax, self._t0, self._t1)
        return sum(a.nbytes for a in arrays)

    def __len__(self) -> int:
        return self._closed + (1 if self._open else 0)

    def append(self, t_s: np.ndarray, readings: np.ndarray, baselines: np.ndarray) -> None:
        """Frames in time order: `t_s` (n,), `readings` and `baselines` (n, channels)."""
        n = len(t_s)
        if n == 0:
            return
        if readings.shape != (n, self.channels) or baselines.shape != (n, self.channels):
            raise ValueError(f"expected {n} frames of {self.channels} channels, got {readings.shape} and "
                             f"{baselines.shape}")
        self.frames += n
        i = 0
        while i < n:
            if self._open:  # top up the bucket being filled
                take = min(self.span - self._open, n - i)
                self._fold(self._closed, t_s[i:i + take], readings[i:i + take], baselines[i:i + take])
                self._open += take
                i += take
            else:  # whole buckets at once (reshaped), then what is left starts a new one
                room = self.capacity - self._closed
                whole = min((n - i) // self.span, room)
                if whole:
                    j = i + whole * self.span
                    self._put(self._closed, whole, t_s[i:j], readings[i:j], baselines[i:j])
                    self._closed += whole
                    i = j
                elif i < n:
                    take = min(self.span, n - i)
                    k = self._closed
                    self._t0[k], self._t1[k] = t_s[i], t_s[i + take - 1]
                    self._rmin[k], self._rmax[k] = readings[i:i + take].min(0), readings[i:i + take].max(0)
                    self._bmin[k], self._bmax[k] = baselines[i:i + take].min(0), baselines[i:i + take].max(0)
                    self._open = take
                    i += take
            if self._open == self.span:
                self._closed, self._open = self._closed + 1, 0
            if self._closed == self.capacity:
                self._halve()

    def _fold(self, k: int, t: np.ndarray, r: np.ndarray, b: np.ndarray) -> None:
        self._t1[k] = t[-1]
        np.minimum(self._rmin[k], r.min(0), out=self._rmin[k])
        np.maximum(self._rmax[k], r.max(0), out=self._rmax[k])
        np.minimum(self._bmin[k], b.min(0), out=self._bmin[k])
        np.maximum(self._bmax[k], b.max(0), out=self._bmax[k])

    def _put(self, k: int, count: int, t: np.ndarray, r: np.ndarray, b: np.ndarray) -> None:
        shape = (count, self.span, self.channels)
        self._t0[k:k + count] = t[:: self.span]
        self._t1[k:k + count] = t[self.span - 1:: self.span]
        self._rmin[k:k + count] = r.reshape(shape).min(1)
        self._rmax[k:k + count] = r.reshape(shape).max(1)
        self._bmin[k:k + count] = b.reshape(shape).min(1)
        self._bmax[k:k + count] = b.reshape(shape).max(1)

    def _halve(self) -> None:
        """Merge neighbours in pairs: half the buckets, each twice as long."""
        half = self.capacity // 2
        for arr, fold in ((self._rmin, np.minimum), (self._rmax, np.maximum),
                          (self._bmin, np.minimum), (self._bmax, np.maximum)):
            arr[:half] = fold(arr[0::2], arr[1::2])
        self._t0[:half] = self._t0[0::2]
        self._t1[:half] = self._t1[1::2]
        self._closed, self.span = half, self.span * 2

    def series(self, channel: int, since_s: float | None = None) -> LongSeries:
        """Channel `channel`'s buckets (copies), oldest first; only those ending at or after `since_s`."""
        n = len(self)
        start = 0 if since_s is None else int(np.searchsorted(self._t1[:n], since_s, side="left"))
        sl = slice(start, n)
        return LongSeries(self._t0[sl].copy(), self._t1[sl].copy(), self._rmin[sl, channel].copy(),
                          self._rmax[sl, channel].copy(), self._bmin[sl, channel].copy(),
                          self._bmax[sl, channel].copy(), self.span)

    @property
    def newest_s(self) -> float | None:
        """Host time of the newest frame (None before the first)."""
        return float(self._t1[len(self) - 1]) if len(self) else None

    @property
    def span_s(self) -> float:
        """Host seconds from the first frame to the last (0 before two frames)."""
        n = len(self)
        return float(self._t1[n - 1] - self._t0[0]) if n else 0.0
