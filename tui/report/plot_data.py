"""What the report's delta and histogram plots draw, worked out from passes over a recording of any length.

`plots.delta_plot` and `plots.histogram_plot` take a key's whole delta trace. Here the same points come
from passes (`processing.frame_source`), a piece at a time, for every key at once:

- `sketches`: one pass over `FrameSource.pieces()` and `DeltaPasses` together (cut anywhere, each re-cut at
  the other's cuts by `aligned`). Each key's envelope is `plots.envelope(t_s, delta)`: its buckets depend
  on the total frames, which the source knows up front, and each bucket keeps its first min and first max
  (`np.argmin`/`np.argmax`, NaN first as they take it) across the pieces it spans. The times of each
  touch's first and last frame are picked up on the way (the shaded spans).
- `histograms`: two passes over the values to count (as the caller's passes give them: rounded or not):
  the first finds each key's lowest and highest quiet or touched value, which with the threshold set the
  same 60 bins as `plots.histogram_plot` (`plots.histogram_bins`); the second sums `np.histogram` of each
  piece's values over those bins.

Memory: a few numbers per bucket and key, the touches' times, the bins and counts; never a trace.
Pure numpy (matplotlib is only in `plots`), no I/O.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass

import numpy as np

from processing.frame_ranges import normalised, take
from processing.frame_source import DeltaPasses, DeltaPiece, FrameSource, Piece
from tui.report.plots import MAX_POINTS, histogram_bins


@dataclass(frozen=True, slots=True)
class Sketch:
    """One key's delta plot data: its envelope (`plots.envelope`) and each touch's (first, last) time."""

    t_s: np.ndarray
    delta: np.ndarray
    spans_s: list[tuple[float, float]]


@dataclass(frozen=True, slots=True)
class Histogram:
    """One key's histogram data: the bin edges and the frames of quiet and touched values in each bin."""

    bins: np.ndarray
    quiet_counts: np.ndarray
    touched_counts: np.ndarray


def aligned(pieces: Iterable[Piece], deltas: Iterable[DeltaPiece]
            ) -> Iterator[tuple[int, np.ndarray, np.ndarray]]:
    """(first frame, times, deltas) over the frames of a pass of each, cut wherever either is cut."""
    times = _following(((p.start, p.t_s) for p in pieces), "frame source")
    values = _following(deltas, "delta pass")
    t, v = next(times, None), next(values, None)
    while t is not None and v is not None:
        lo = max(t[0], v[0])
        hi = min(t[0] + len(t[1]), v[0] + len(v[1]))
        yield lo, t[1][lo - t[0]:hi - t[0]], v[1][lo - v[0]:hi - v[0]]
        if t[0] + len(t[1]) == hi:
            t = next(times, None)
        if v[0] + len(v[1]) == hi:
            v = next(values, None)
    if t is not None or v is not None:
        raise ValueError("the frame source and the delta pass do not cover the same frames")


def _following(pieces: Iterable[tuple[int, np.ndarray]], what: str) -> Iterator[tuple[int, np.ndarray]]:
    """The non-empty pieces, each checked to begin where the one before ended."""
    at = 0
    for start, values in pieces:
        if start != at:
            raise ValueError(f"a {what}'s pieces must follow on: piece at frame {start}, expected {at}")
        at = start + len(values)
        if len(values):
            yield start, values


class _Buckets:
    """Every key's first min and first max in each of `plots.envelope`'s buckets, piece by piece."""

    def __init__(self, frames: int, width: int, points: int) -> None:
        self.edges = np.linspace(0, frames, points // 2 + 1).astype(int)
        shape = (len(self.edges) - 1, width)
        self.lo_v, self.hi_v = np.full(shape, np.nan), np.full(shape, np.nan)
        self.lo_t, self.hi_t = np.zeros(shape), np.zeros(shape)
        self.lo_i, self.hi_i = np.full(shape, -1, np.int64), np.full(shape, -1, np.int64)

    def add(self, start: int, t_s: np.ndarray, delta: np.ndarray) -> None:
        stop = start + len(t_s)
        k = int(np.searchsorted(self.edges, start, side="right")) - 1
        while k < len(self.edges) - 1 and self.edges[k] < stop:
            a, b = max(int(self.edges[k]), start), min(int(self.edges[k + 1]), stop)
            if b > a:
                seg = np.asarray(delta[a - start:b - start], np.float64)
                self._merge(k, a, t_s[a - start:b - start], seg, np.argmin(seg, axis=0), low=True)
                self._merge(k, a, t_s[a - start:b - start], seg, np.argmax(seg, axis=0), low=False)
            k += 1

    def _merge(self, k: int, a: int, t_s: np.ndarray, seg: np.ndarray, at: np.ndarray, low: bool) -> None:
        cols = np.arange(seg.shape[1])
        new = seg[at, cols]
        vals, times, idx = (self.lo_v, self.lo_t, self.lo_i) if low else (self.hi_v, self.hi_t, self.hi_i)
        old = vals[k]
        better = new < old if low else new > old
        # As np.argmin/argmax over the whole bucket: the first NaN wins, else the first extreme (strictly
        # better values only, the earlier piece keeping a tie).
        take_new = (idx[k] < 0) | (np.isnan(new) & ~np.isnan(old)) | (better & ~np.isnan(old))
        vals[k] = np.where(take_new, new, old)
        times[k] = np.where(take_new, t_s[at], times[k])
        idx[k] = np.where(take_new, a + at, idx[k])

    def points(self, c: int) -> tuple[np.ndarray, np.ndarray]:
        """Key c's (t, v) pairs: each bucket's min and max in frame order (both when they are one frame)."""
        lo_first = self.lo_i[:, c] <= self.hi_i[:, c]
        t = np.column_stack([np.where(lo_first, self.lo_t[:, c], self.hi_t[:, c]),
                             np.where(lo_first, self.hi_t[:, c], self.lo_t[:, c])]).ravel()
        v = np.column_stack([np.where(lo_first, self.lo_v[:, c], self.hi_v[:, c]),
                             np.where(lo_first, self.hi_v[:, c], self.lo_v[:, c])]).ravel()
        return t, v


def _span_frames(stretches: Sequence[Sequence[tuple[int, int]]], frames: int) -> list[int]:
    """The frames whose times shade the touches: each touch's first and last (`plots.delta_plot`)."""
    wanted = set()
    for runs in stretches:
        for a, b in runs:
            for f in (a, min(b, frames) - 1):
                if not -frames <= f < frames:
                    raise ValueError(f"a touch [{a}, {b}) lies outside the {frames} frames")
                wanted.add(f % frames)  # a negative frame counts from the end, as numpy indexing does
    return sorted(wanted)


def sketches(source: FrameSource, deltas: DeltaPasses, stretches: Sequence[Sequence[tuple[int, int]]],
             points: int = MAX_POINTS) -> list[Sketch]:
    """Per key, what `plots.delta_plot` draws of `(t_s, delta[:, c], stretches[c])`: one pass."""
    frames, width = source.frames, source.width
    if len(stretches) != width:
        raise ValueError(f"one list of touches per key: {len(stretches)} lists for {width} keys")
    wanted = np.array(_span_frames(stretches, frames), np.int64)
    found_t = np.zeros(len(wanted))
    short = frames <= points  # `envelope` keeps every point
    buckets = None if short else _Buckets(frames, width, points)
    held_t: list[np.ndarray] = []
    held_v: list[np.ndarray] = []
    for start, t_s, delta in aligned(source.pieces(), deltas()):
        i, j = np.searchsorted(wanted, [start, start + len(t_s)])
        found_t[i:j] = t_s[wanted[i:j] - start]
        if buckets is not None:
            buckets.add(start, t_s, delta)
        else:
            held_t.append(np.asarray(t_s, np.float64))
            held_v.append(np.asarray(delta, np.float64))
    time_of = dict(zip(wanted.tolist(), found_t.tolist(), strict=True))
    out = []
    for c, runs in enumerate(stretches):
        if buckets is not None:
            t, v = buckets.points(c)
        else:
            t = np.concatenate(held_t) if held_t else np.zeros(0)
            v = np.concatenate(held_v)[:, c] if held_v else np.zeros(0)
        spans = [(time_of[a % frames], time_of[(min(b, frames) - 1) % frames]) for a, b in runs]
        out.append(Sketch(t, v, spans))
    return out


def histograms(values: DeltaPasses, quiet: Sequence[tuple[int, int]],
               touched: Sequence[Sequence[tuple[int, int]]], thresholds: Sequence[float | None]
               ) -> list[Histogram]:
    """Per key c, the bins and counts `plots.histogram_plot(quiet values, touched values, thresholds[c])`
    draws, its quiet values being column c in the `quiet` frames (the same for every key) and its touched
    ones column c in `touched[c]`: two passes over `values`."""
    width = len(touched)
    if len(thresholds) != width:
        raise ValueError(f"one threshold per key: {len(thresholds)} for {width} keys")
    quiet = normalised(quiet)
    own = [normalised(runs) for runs in touched]
    lo, hi = np.full(width, np.inf), np.full(width, -np.inf)
    for start, piece in values():
        for c in range(width):
            for part in (take(piece[:, c], start, quiet), take(piece[:, c], start, own[c])):
                if len(part):
                    lo[c], hi[c] = min(lo[c], float(part.min())), max(hi[c], float(part.max()))
    bins = [histogram_bins(float(lo[c]) if lo[c] <= hi[c] else None,
                           float(hi[c]) if lo[c] <= hi[c] else None, thresholds[c]) for c in range(width)]
    counts = [(np.zeros(len(b) - 1, np.int64), np.zeros(len(b) - 1, np.int64)) for b in bins]
    for start, piece in values():
        for c in range(width):
            for side, ranges in enumerate((quiet, own[c])):
                part = take(piece[:, c], start, ranges)
                if len(part):
                    counts[c][side][:] += np.histogram(part, bins[c])[0]
    return [Histogram(bins[c], *counts[c]) for c in range(width)]
