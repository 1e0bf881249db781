"""Untouched reading extremes from one pass (processing.reading_extremes) against numpy over the whole
readings: a boolean mask and .min()/.max() (the reference), at random piece sizes down to 1 frame."""

from __future__ import annotations

import numpy as np
import pytest

from processing.frame_source import ArraySource
from processing.reading_extremes import untouched_extremes


def _case(seed: int) -> tuple[np.ndarray, list[list[tuple[int, int]]], int]:
    rng = np.random.default_rng(seed)
    frames, width = int(rng.integers(1, 300)), int(rng.integers(1, 5))
    readings = rng.integers(-(1 << 40), 1 << 40, (frames, width), dtype=np.int64)
    readings //= 1 << int(rng.integers(0, 30))  # wide integers, some near float64's last exact bits
    stretches = []
    for _ in range(width):  # unsorted, overlapping, empty, past the end, now and then all the frames
        starts = rng.integers(0, frames + 3, rng.integers(0, 5))
        runs = [(int(a), int(a + rng.integers(0, 80))) for a in starts]
        if rng.random() < 0.1:
            runs.append((0, frames + 2))
        stretches.append(runs)
    return readings, stretches, int(rng.integers(1, 40))


@pytest.mark.parametrize("seed", range(40))
def test_extremes_equal_numpy_over_the_untouched_frames(seed: int) -> None:
    readings, stretches, piece = _case(seed)
    source = ArraySource(np.arange(len(readings)) / 50.0, readings, piece)
    got = untouched_extremes(source, stretches)
    for c, runs in enumerate(stretches):
        keep = np.ones(len(readings), bool)
        for a, b in runs:
            keep[a:b] = False
        want = (int(readings[keep, c].min()), int(readings[keep, c].max())) if keep.any() else None
        assert got[c] == want
        assert got[c] is None or all(type(v) is int for v in got[c])


def test_a_channel_touched_throughout_has_none() -> None:
    readings = np.array([[5, 9], [6, 1], [7, 4]])
    got = untouched_extremes(ArraySource(np.arange(3.0), readings, 1), [[(0, 3)], [(1, 2)]])
    assert got == [None, (4, 9)]


@pytest.mark.parametrize("stretches", [[[(-1, 2)], []], [[]]])
def test_bad_touches_are_refused(stretches: list[list[tuple[int, int]]]) -> None:
    with pytest.raises(ValueError, match="touch"):
        untouched_extremes(ArraySource(np.arange(3.0), np.zeros((3, 2), np.int64)), stretches)
