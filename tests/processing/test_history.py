"""The long view's bounded, decimated history (processing/history.py).

Reference: numpy's own reductions over the full, undecimated frames (`np.min`/`np.max` over each
bucket's frames, the bucket k covering frames [k*span, (k+1)*span)), computed independently of the
ring's incremental folding and pair merging.
"""

from __future__ import annotations

import numpy as np
import pytest

from processing.history import LongHistory


def _reference(values: np.ndarray, span: int, fold) -> np.ndarray:
    starts = np.arange(0, len(values), span)
    return np.stack([fold(values[s:s + span], axis=0) for s in starts])


@pytest.mark.parametrize("seed", range(6))
def test_buckets_match_numpy_over_the_undecimated_frames(seed):
    rng = np.random.default_rng(seed)
    channels, capacity = 3, int(rng.choice([2, 4, 8, 64]))
    total = int(rng.integers(1, 3000))
    t = np.cumsum(rng.uniform(0.0005, 0.002, total))
    r = rng.normal(1000, 30, (total, channels)).astype(np.float32)
    b = rng.normal(1000, 5, (total, channels)).astype(np.float32)
    h = LongHistory(channels, capacity)
    i = 0
    while i < total:  # blocks of any size, as polls bring them
        n = int(rng.integers(1, 200))
        h.append(t[i:i + n], r[i:i + n], b[i:i + n])
        i += n
    assert h.frames == total and len(h) <= capacity
    for ch in range(channels):
        s = h.series(ch)
        np.testing.assert_array_equal(s.reading_min, _reference(r[:, ch], h.span, np.min))
        np.testing.assert_array_equal(s.reading_max, _reference(r[:, ch], h.span, np.max))
        np.testing.assert_array_equal(s.baseline_min, _reference(b[:, ch], h.span, np.min))
        np.testing.assert_array_equal(s.baseline_max, _reference(b[:, ch], h.span, np.max))
        np.testing.assert_array_equal(s.t_first_s, t[::h.span])
        np.testing.assert_array_equal(s.t_last_s, np.append(t[h.span - 1::h.span], t[-1])[:len(s)])


def test_an_hour_at_1_khz_stays_bounded_and_keeps_a_one_frame_spike():
    rate_hz, channels, capacity = 1000, 2, 1024
    h = LongHistory(channels, capacity)
    fixed = h.nbytes
    assert fixed == 4 * capacity * channels * 4 + 2 * capacity * 8  # as the module's docstring states
    rng = np.random.default_rng(7)
    spike_frame, drift_per_s = 2_345_678, 0.05  # a one-frame spike 39 minutes in; slow thermal drift
    for second in range(3600):
        f0 = second * rate_hz
        t = (f0 + np.arange(rate_hz)) / rate_hz
        base = 1000 + drift_per_s * t
        r = (base[:, None] + rng.normal(0, 2, (rate_hz, channels))).astype(np.float32)
        if f0 <= spike_frame < f0 + rate_hz:
            r[spike_frame - f0, 1] += 500
        h.append(t, r, np.repeat(base[:, None], channels, 1).astype(np.float32))
        assert h.nbytes == fixed and len(h) <= capacity
    assert h.frames == 3_600_000
    assert h.span_s == pytest.approx(3600, abs=0.01)
    assert capacity // 2 <= len(h) <= capacity
    s = h.series(1)
    k = spike_frame // h.span
    assert s.reading_max[k] > 1000 + drift_per_s * spike_frame / rate_hz + 400  # survived the decimation
    assert np.delete(s.reading_max, k).max() < s.reading_max[k] - 400
    # the drift reads off the baseline: 0.05 counts/s over an hour is 180 counts
    assert s.baseline_max[-1] - s.baseline_min[0] == pytest.approx(180, abs=1)
    late = h.series(1, since_s=3000.0)
    assert late.t_last_s[0] >= 3000.0 and len(late) < len(s)


def test_bad_shapes_and_capacity_are_refused():
    with pytest.raises(ValueError):
        LongHistory(2, 3)
    h = LongHistory(2, 4)
    with pytest.raises(ValueError):
        h.append(np.zeros(2), np.zeros((2, 3)), np.zeros((2, 3)))
    h.append(np.zeros(0), np.zeros((0, 2)), np.zeros((0, 2)))
    assert len(h) == 0 and h.span_s == 0.0
