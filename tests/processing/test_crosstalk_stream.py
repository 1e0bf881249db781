"""Crosstalk a pass at a time (processing.crosstalk_stream) against the whole-array computation.

The reference is `couplings_by_key` (tests/processing/tune_reference.py) on the whole delta array (its
medians are numpy's `np.median`, its frames a numpy mask from `alone_frames`): the streaming couplings
must be the same, field for field, floats compared bit for bit (`float.hex`), in the same order."""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np
import pytest

from processing.crosstalk import MIN_FRAMES, Coupling, untouched_zero
from processing.crosstalk_stream import couplings_streaming
from processing.frame_ranges import to_mask
from processing.slider import SliderSpec
from tests.processing.tune_reference import couplings_by_key


def _exactly(found: list[Coupling]) -> list[tuple]:
    return [(c.source, c.target, c.shift_counts.hex(), c.frames, c.threshold_counts, c.slider) for c in found]


class Deltas:
    """`DeltaPasses` over an array in pieces of `piece_frames`, counting passes."""

    def __init__(self, full: np.ndarray, piece_frames: int) -> None:
        self.full = full
        self.piece_frames = piece_frames
        self.calls = 0

    def __call__(self) -> Iterator[tuple[int, np.ndarray]]:
        self.calls += 1
        for a in range(0, len(self.full), self.piece_frames):
            yield a, self.full[a:a + self.piece_frames]


def _random_case(rng: np.random.Generator):
    frames = int(rng.integers(20, 3000))
    width = int(rng.integers(1, 9))
    if rng.random() < 0.5:
        full = rng.integers(-6, 7, (frames, width)).astype(np.float64)  # many ties
    else:
        full = rng.normal(0.0, 4.0, (frames, width)) + rng.normal(0.0, 30.0, width)
    stretches = []
    for _ in range(width):
        starts = np.sort(rng.integers(0, frames, int(rng.integers(0, 6))))
        stretches.append([(int(a), int(min(frames, a + rng.integers(1, 120)))) for a in starts])
    quiet_starts = rng.integers(-10, frames, int(rng.integers(0, 5)))
    quiet = [(int(a), int(a + rng.integers(0, 300))) for a in quiet_starts]
    thresholds = {c: (float(rng.integers(5, 80)) if rng.random() < 0.8 else None) for c in range(width)}
    return frames, width, full, stretches, quiet, thresholds


def _reference(full, stretches, frames, quiet, thresholds, sliders=()) -> list[Coupling]:
    quiet_mask = to_mask(quiet, frames)
    return couplings_by_key(lambda c: full[:, c], stretches, frames,
                            lambda c, d: untouched_zero(d[quiet_mask]), thresholds, sliders)


@pytest.mark.parametrize("seed", range(60))
def test_streaming_couplings_equal_the_whole_array_ones(seed: int) -> None:
    rng = np.random.default_rng(seed)
    frames, width, full, stretches, quiet, thresholds = _random_case(rng)
    sliders = [SliderSpec("vent", tuple(range(min(3, width))))] if seed % 3 == 0 else []
    want = _reference(full, stretches, frames, quiet, thresholds, sliders)
    deltas = Deltas(full, int(rng.integers(1, 700)))
    budget = int(rng.choice([8, 60, 500, 1 << 22]))
    got = couplings_streaming(deltas, stretches, frames, quiet, thresholds, sliders,
                              budget_values=budget, bins=int(rng.integers(2, 100)))
    assert _exactly(got) == _exactly(want)
    if sliders and any(c.neighbours for c in want):
        assert any(c.neighbours for c in got)


def test_the_random_cases_measure_something() -> None:
    """Guards the test above: most random cases have couplings, some of them slider neighbours."""
    found = []
    for seed in range(60):
        frames, _, full, stretches, quiet, thresholds = _random_case(np.random.default_rng(seed))
        found.append(_reference(full, stretches, frames, quiet, thresholds, [SliderSpec("vent", (0, 1))]))
    assert sum(bool(f) for f in found) >= 40
    assert sum(c.neighbours for f in found for c in f) >= 10


def test_a_worked_case_has_couplings_and_zeros() -> None:
    """Key 0 touched alone for 40 frames moves key 1 by +9 over a zero of +2 (worked by hand: key 1 reads 2
    when quiet, 11 under key 0's touch), key 2 not at all; the reference agrees with the hand figures."""
    frames = 200
    full = np.zeros((frames, 3))
    full[:, 1] = 2.0
    full[50:90, 0] = 100.0
    full[50:90, 1] = 11.0
    stretches = [[(50, 90)], [], []]
    quiet = [(120, 200)]
    thresholds = {0: 60.0, 1: 30.0, 2: 30.0}
    got = couplings_streaming(Deltas(full, 16), stretches, frames, quiet, thresholds, budget_values=8)
    assert [(c.source, c.target, c.shift_counts, c.frames) for c in got] == [(0, 1, 9.0, 40), (0, 2, 0.0, 40)]
    assert _exactly(got) == _exactly(_reference(full, stretches, frames, quiet, thresholds))


def test_more_queries_than_the_budget_holds() -> None:
    rng = np.random.default_rng(11)
    frames, width = 6000, 16
    full = rng.normal(0.0, 3.0, (frames, width))
    stretches = [[(int(300 * c + 10), int(300 * c + 250))] for c in range(width)]  # each alone, 240 frames
    quiet = [(4900, 6000)]
    thresholds = dict.fromkeys(range(width), 40.0)
    deltas = Deltas(full, 777)
    got = couplings_streaming(deltas, stretches, frames, quiet, thresholds, budget_values=3000, bins=64)
    assert len(got) == width * (width - 1)
    assert _exactly(got) == _exactly(_reference(full, stretches, frames, quiet, thresholds))
    # 240 pair queries of 240 values (57,600 in all) and 16 zeros of 1,100 against 3,000 values a pass:
    # batches and narrowing, where the default budget holds them all in one pass
    assert deltas.calls > 2
    roomy = Deltas(full, 777)
    assert _exactly(couplings_streaming(roomy, stretches, frames, quiet, thresholds)) == _exactly(got)
    assert roomy.calls == 1


def test_too_few_frames_give_no_coupling_and_a_zero_of_nought() -> None:
    rng = np.random.default_rng(12)
    frames = 100
    full = rng.normal(5.0, 1.0, (frames, 2))
    short = [[(10, 10 + MIN_FRAMES - 1)], []]
    assert couplings_streaming(Deltas(full, 9), short, frames, [(50, 100)], {}) == []
    stretches = [[(10, 40)], []]
    tiny_quiet = [(60, 60 + MIN_FRAMES - 1)]  # too few quiet frames: zero 0.0
    got = couplings_streaming(Deltas(full, 9), stretches, frames, tiny_quiet, {})
    assert _exactly(got) == _exactly(_reference(full, stretches, frames, tiny_quiet, {}))
    assert got[0].shift_counts == float(np.median(full[10:40, 1]))  # reference: np.median, no zero taken


def test_a_delta_piece_of_the_wrong_width_is_refused() -> None:
    full = np.zeros((50, 3))
    with pytest.raises(ValueError, match="frames x 2 keys"):
        couplings_streaming(Deltas(full, 10), [[(0, 20)], []], 50, [(30, 50)], {})
