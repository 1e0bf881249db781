"""Sets of frames as sorted, disjoint [start, stop) ranges, and the values they pick out of a piece.

Streaming tuning never builds a frames-long mask: a key's touches, the quiet frames, the frames where one
key alone was touched are each a short list of ranges (one per touch, not one per frame). `Ranges` is a
list of (start, stop) pairs, sorted and disjoint, empty ranges left out. `take(values, start, ranges)`
gives the values of a piece (its first frame at `start`) that fall inside the ranges, in frame order:
concatenated over every piece of a pass, exactly `full[mask]` of the whole recording.
Pure numpy, no I/O.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

import numpy as np

Ranges = list[tuple[int, int]]


def normalised(ranges: Iterable[tuple[int, int]], frames: int | None = None) -> Ranges:
    """Sorted, merged (overlapping or touching ranges joined), clipped to [0, frames), empty ones dropped."""
    out: Ranges = []
    for a, b in sorted((int(a), int(b)) for a, b in ranges):
        if frames is not None:
            a, b = max(0, a), min(b, frames)
        if b <= a:
            continue
        if out and a <= out[-1][1]:
            out[-1] = (out[-1][0], max(out[-1][1], b))
        else:
            out.append((a, b))
    return out


def widened(ranges: Iterable[tuple[int, int]], guard: int, frames: int) -> Ranges:
    """Each range widened by `guard` frames both sides, merged and clipped to [0, frames)."""
    return normalised(((a - guard, b + guard) for a, b in ranges), frames)


def complement(ranges: Sequence[tuple[int, int]], frames: int) -> Ranges:
    """The frames of [0, frames) outside `ranges` (which must be normalised)."""
    out: Ranges = []
    at = 0
    for a, b in ranges:
        if a > at:
            out.append((at, a))
        at = max(at, b)
    if at < frames:
        out.append((at, frames))
    return out


def count(ranges: Iterable[tuple[int, int]]) -> int:
    """Frames in `ranges` (normalised)."""
    return sum(b - a for a, b in ranges)


def from_mask(mask: np.ndarray, start: int = 0) -> Ranges:
    """The True runs of a boolean mask as ranges, its first element being frame `start`."""
    edges = np.flatnonzero(np.diff(np.concatenate([[0], np.asarray(mask, np.int8), [0]])))
    return [(start + a, start + b) for a, b in zip(edges[0::2].tolist(), edges[1::2].tolist(), strict=True)]


def to_mask(ranges: Iterable[tuple[int, int]], frames: int) -> np.ndarray:
    """A frames-long boolean mask of `ranges` (for tests and short captures; streaming code uses `take`)."""
    mask = np.zeros(frames, bool)
    for a, b in ranges:
        mask[max(0, a):b] = True
    return mask


def overlapping(ranges: Sequence[tuple[int, int]], start: int, stop: int) -> Ranges:
    """The parts of normalised `ranges` inside [start, stop), found by bisection (ranges sorted)."""
    if not ranges or stop <= start:
        return []
    stops = _stops(ranges)
    i = int(np.searchsorted(stops, start, side="right"))
    out: Ranges = []
    while i < len(ranges) and ranges[i][0] < stop:
        a, b = ranges[i]
        out.append((max(a, start), min(b, stop)))
        i += 1
    return out


def _stops(ranges: Sequence[tuple[int, int]]) -> np.ndarray:
    return np.fromiter((b for _, b in ranges), np.int64, len(ranges))


def take(values: np.ndarray, start: int, ranges: Sequence[tuple[int, int]]) -> np.ndarray:
    """The elements of `values` (frame `start` first, along axis 0) inside normalised `ranges`, in order."""
    parts = [values[a - start:b - start] for a, b in overlapping(ranges, start, start + len(values))]
    if not parts:
        return values[:0]
    return parts[0] if len(parts) == 1 else np.concatenate(parts)


def alone(stretches: Sequence[Sequence[tuple[int, int]]], frames: int) -> dict[int, Ranges]:
    """Key -> the frames where it was the only key touched, from each key's [start, stop) touches (a sweep
    over the touches' ends: no frames-long array). Keys never touched alone are left out. The same frames as
    a per-frame counter of touched keys gives (`alone_frames` in tests/processing/tune_reference.py)."""
    events: list[tuple[int, int, int]] = []  # (frame, +1 start / -1 stop, key)
    for key, runs in enumerate(stretches):
        for a, b in normalised(runs, frames):
            events += [(a, 1, key), (b, -1, key)]
    events.sort(key=lambda e: (e[0], e[1]))  # at one frame, stops before starts
    out: dict[int, Ranges] = {}
    held: dict[int, int] = {}  # key -> how many of its (merged) touches cover this frame (0 or 1)
    at = 0
    for frame, step, key in events:
        if frame > at and len(held) == 1:
            (only,) = held
            ranges = out.setdefault(only, [])
            if ranges and ranges[-1][1] == at:
                ranges[-1] = (ranges[-1][0], frame)
            else:
                ranges.append((at, frame))
        at = frame
        if step > 0:
            held[key] = held.get(key, 0) + 1
        elif held.get(key, 0) <= 1:
            held.pop(key, None)
        else:
            held[key] -= 1
    return out
