"""The fixed-point baseline follower against the exact first-order recursion.

Reference: scipy.signal.lfilter with b = [a], a = [1, -(1 - a)], a = 2**-shift, which computes
y[k] = (1 - a) * y[k-1] + a * x[k] in floating point. ALGORITHM.md states the bound: the truncating
integer follower stays within 2**shift fixed-point units of it.
"""

import numpy as np
import pytest
from scipy.signal import lfilter

from processing.engine import Engine
from processing.reference import PlainEngine
from processing.settings import ChannelSettings
from tests.processing.helpers import block


def follow(cls, x0, periods, period, shift):
    s = ChannelSettings(threshold_counts=10_000, hysteresis_counts=0, baseline_slow_shift=shift,
                        baseline_fast_shift=shift, baseline_period_frames=period)
    e = cls(1, [s], [1])
    e.process(block(np.full(period, x0)))  # frame 0 takes the baseline; this period is discarded
    out = []
    for k, rows in enumerate(periods):
        e.process(block(rows, first_index=(k + 1) * period))
        out.append(e.baselines_fp[0])
    return np.array(out, np.float64)


@pytest.mark.parametrize("cls", [PlainEngine, Engine])
@pytest.mark.parametrize(("period", "shift"), [(1, 4), (16, 3), (4, 8), (256, 0)])
def test_follower_matches_lfilter_within_stated_rounding(cls, period, shift):
    rng = np.random.default_rng(period * 31 + shift)
    k = 300
    drift = 1000 + np.cumsum(rng.integers(-4, 6, k))  # a wandering level with noise on top
    periods = [drift[i] + rng.integers(-20, 21, period) for i in range(k)]
    got = follow(cls, 1000, periods, period, shift)
    a = 2.0**-shift
    means_fp = np.array([p.sum() * 256.0 / period for p in periods])
    want, _ = lfilter([a], [1.0, -(1.0 - a)], means_fp, zi=[(1.0 - a) * 1000 * 256.0])
    assert np.max(np.abs(got - want)) < 2**shift


def test_follower_uses_slow_shift_toward_touch_and_fast_shift_away():
    s = ChannelSettings(threshold_counts=10_000, hysteresis_counts=0, baseline_slow_shift=6,
                        baseline_fast_shift=2, baseline_period_frames=1)
    e = PlainEngine(1, [s], [1])
    e.process(block(np.array([1000, 1100])))  # +100 counts: step = 100*256 / 64 = 400 units
    assert e.baselines_fp == [1000 * 256 + 400]
    e = PlainEngine(1, [s], [1])
    e.process(block(np.array([1000, 900])))  # -100 counts: step = -100*256 / 4 = -6400 units
    assert e.baselines_fp == [1000 * 256 - 6400]
    e = PlainEngine(1, [s], [-1])  # polarity -1: a falling reading is toward touch, so slow
    e.process(block(np.array([1000, 900])))
    assert e.baselines_fp == [1000 * 256 - 400]


def test_truncation_leaves_baseline_short_of_a_constant_reading():
    # 1001 after 1000 with shift 10: diff 256 units, 256 / 1024 truncates to 0: no step (C99 behaviour).
    s = ChannelSettings(threshold_counts=100, hysteresis_counts=0, baseline_slow_shift=10,
                        baseline_fast_shift=10, baseline_period_frames=1)
    e = Engine(1, [s], [1])
    e.process(block(np.array([1000] + [1001] * 50)))
    assert e.baselines_fp == [1000 * 256]
