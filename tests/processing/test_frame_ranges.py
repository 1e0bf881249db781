"""Frame ranges (processing.frame_ranges) against plain boolean masks built with numpy (the reference: a
frames-long mask and numpy boolean indexing, independent of the range arithmetic)."""

from __future__ import annotations

import numpy as np
import pytest

from processing.frame_ranges import alone, complement, count, from_mask, normalised, take, to_mask, widened
from processing.frame_source import ArraySource
from tests.processing.tune_reference import alone_frames


def _random_ranges(rng: np.random.Generator, frames: int, n: int) -> list[tuple[int, int]]:
    starts = rng.integers(-5, frames + 5, n)
    return [(int(a), int(a + rng.integers(0, 40))) for a in starts]


@pytest.mark.parametrize("seed", range(30))
def test_ranges_agree_with_masks(seed: int) -> None:
    rng = np.random.default_rng(seed)
    frames = int(rng.integers(1, 400))
    raw = _random_ranges(rng, frames, int(rng.integers(0, 12)))
    mask = np.zeros(frames, bool)
    for a, b in raw:
        mask[max(0, a):max(0, b)] = True
    ranges = normalised(raw, frames)
    assert np.array_equal(to_mask(ranges, frames), mask)
    assert from_mask(mask) == ranges
    assert count(ranges) == int(mask.sum())
    assert np.array_equal(to_mask(complement(ranges, frames), frames), ~mask)
    guard = int(rng.integers(0, 9))
    wide = np.zeros(frames, bool)
    for a, b in raw:  # as `find_touches` marks busy frames: an empty touch still widens by the guard
        wide[max(0, a - guard):max(0, b + guard)] = True
    assert np.array_equal(to_mask(widened(raw, guard, frames), frames), wide)
    values = rng.normal(size=(frames, 3))
    for piece_frames in (1, 7, 64, 1000):
        src = ArraySource(np.arange(frames) / 100.0, values, piece_frames)
        got = [take(p.readings, p.start, ranges) for p in src.pieces()]
        assert np.array_equal(np.concatenate(got), values[mask])


@pytest.mark.parametrize("seed", range(30))
def test_alone_agrees_with_the_per_frame_counter(seed: int) -> None:
    rng = np.random.default_rng(100 + seed)
    frames = int(rng.integers(1, 500))
    stretches = [normalised(_random_ranges(rng, frames, int(rng.integers(0, 6))), frames)
                 for _ in range(int(rng.integers(1, 6)))]
    want = alone_frames(stretches, frames)
    got = alone(stretches, frames)
    assert sorted(got) == sorted(want)
    for key, rows in want.items():
        assert np.array_equal(np.flatnonzero(to_mask(got[key], frames)), rows)
