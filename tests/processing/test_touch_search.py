"""Runs above a level followed across pieces (processing.touch_search.RunFollower) against the runs of the
whole mask found by numpy (`np.diff` of the mask's edges, the reference), with short runs let go."""

from __future__ import annotations

import numpy as np
import pytest

from processing.touch_search import RunFollower


def _whole_runs(mask: np.ndarray) -> list[tuple[int, int]]:
    edges = np.flatnonzero(np.diff(np.concatenate([[False], mask, [False]]).astype(np.int8)))
    return list(zip(edges[0::2].tolist(), edges[1::2].tolist(), strict=True))


@pytest.mark.parametrize("seed", range(30))
def test_runs_across_cuts_equal_the_whole_masks(seed: int) -> None:
    rng = np.random.default_rng(seed)
    frames = int(rng.integers(1, 2000))
    mask = rng.random(frames) < float(rng.uniform(0.05, 0.95))
    shortest = int(rng.integers(1, 6))
    follow = RunFollower(shortest)
    at = 0
    while at < frames:
        n = int(rng.integers(1, 50))
        follow.feed(at, mask[at:at + n])
        at += n
    want = [(a, b) for a, b in _whole_runs(mask) if b - a >= shortest]
    assert follow.finish() == want


def test_a_noisy_keys_spikes_are_not_held() -> None:
    # A one-frame spike every 10th frame for 200,000 frames: none is a touch, none is kept on the way.
    follow = RunFollower(shortest=2)
    most = 0
    mask = np.arange(8192) % 10 == 0
    for start in range(0, 200_000, 8192):
        follow.feed(start, mask)
        most = max(most, len(follow.runs))
    assert most <= 1 and follow.finish() == []
