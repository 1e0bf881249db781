"""Crosstalk between keys and noise while touched (processing.crosstalk).

Outside references: statistics.median and statistics.pstdev (Python's stdlib) over the same frames, a
sine's RMS = amplitude / sqrt(2) (any signals handbook), the alias of 50 Hz at 60 frames/s = |50 - 60| =
10 Hz (the sampling theorem, worked by hand), and hand-worked medians for the crosstalk table.
"""

import math
import statistics

import numpy as np
import pytest

from processing.crosstalk import (
    FLAG_SHARE,
    Coupling,
    couplings,
    describe,
    during_touches,
    level_window,
    running_median,
    touched_noise,
    worst_by_target,
)


def test_running_median_matches_the_stdlib_window_by_window():
    rng = np.random.default_rng(1)
    x = rng.integers(-20, 20, 57).astype(float)
    got = running_median(x, 7)
    want = [statistics.median(x[i:i + 7].tolist()) for i in range(len(x) - 6)]
    assert got.tolist() == want
    assert len(running_median(x[:5], 7)) == 0
    with pytest.raises(ValueError):
        running_median(x, 4)


def test_level_window_is_odd_and_at_least_three():
    assert level_window(60.0) == 13  # 0.2 s x 60 = 12 frames, made odd
    assert level_window(100.0) == 21
    assert level_window(5.0) == 3


def test_touched_noise_of_hum_on_a_finger_is_its_sine_and_aliases_to_10_hz():
    rate = 60.0
    n = 240
    t = np.arange(n) / rate
    amp = 6.0
    # a touch level that sags slowly (pressure) plus 50 Hz hum sampled at 60 frames/s
    level = 300 - 20 * t
    touch = level + amp * np.sin(2 * math.pi * 50.0 * t + 0.3)
    result = touched_noise([touch], rate)
    assert result is not None
    # the level is gone: RMS close to the sine's amplitude / sqrt(2), not the 20-count sag
    assert result.rms_counts == pytest.approx(amp / math.sqrt(2), rel=0.2)
    assert result.peak is not None and result.peak.mains_hz == 50.0 and result.peak.harmonic == 1
    assert result.peak.freq_hz == pytest.approx(10.0, abs=rate / n * 1.01)
    assert result.touches == 1 and result.samples == n - level_window(rate) + 1


def test_touched_noise_rms_is_the_stdlib_pstdev_of_the_residuals_and_a_step_between_touches_is_no_noise():
    rng = np.random.default_rng(4)
    a = 200 + rng.normal(0, 2, 100)
    b = 400 + rng.normal(0, 2, 100)  # a second touch, pressed harder: its level is not noise
    result = touched_noise([a, b], 100.0)
    w = level_window(100.0)
    h = w // 2
    res = []
    for s in (a, b):
        for i in range(h, len(s) - h):
            res.append(s[i] - statistics.median(s[i - h:i + h + 1].tolist()))
    assert result is not None
    assert result.rms_counts == pytest.approx(statistics.pstdev(res), rel=1e-9)
    assert result.pp_counts == pytest.approx(max(res) - min(res))
    assert result.rms_counts < 3.0 and result.touches == 2
    assert touched_noise([a[:5]], 100.0) is None


def test_crosstalk_table_from_frames_worked_by_hand():
    # keys: 0 touched alone for 10 frames, then 1 alone for 10 frames, then both for 5 (left out)
    deltas = np.zeros((25, 3))
    touched = np.zeros((25, 3), bool)
    touched[0:10, 0] = True
    deltas[0:10, 0] = 100
    deltas[0:10, 1] = [10, 11, 12, 13, 14, 15, 16, 17, 18, 19]  # median 14.5
    deltas[0:10, 2] = 1
    touched[10:20, 1] = True
    deltas[10:20, 1] = 90
    deltas[10:20, 0] = -4
    touched[20:25, 0:2] = True
    deltas[20:25, 2] = 500  # both held: which one moved key 2 cannot be said
    during = during_touches(deltas, touched)
    assert sorted(during) == [(0, 1), (0, 2), (1, 0), (1, 2)]
    quiet = {1: np.array([2, 2, 2, 3, 3, 3, 3, 3, 3, 3]), 0: np.zeros(10), 2: np.zeros(10)}  # median 3
    found = couplings(quiet, during, {0: 40, 1: 50, 2: 60})
    by = {(c.source, c.target): c for c in found}
    assert by[(0, 1)].shift_counts == 11.5  # 14.5 - 3
    assert by[(0, 1)].share == pytest.approx(11.5 / 50)
    assert by[(1, 0)].shift_counts == -4 and by[(1, 0)].share == pytest.approx(-0.1)
    assert by[(0, 2)].shift_counts == 1
    assert found[0] == by[(0, 1)]  # the largest share first
    assert not by[(0, 1)].flagged() and by[(0, 1)].flagged(0.2)
    assert worst_by_target(found)[1] == by[(0, 1)]
    assert "23 % of its threshold 50" in describe(by[(0, 1)], ["a", "b", "c"])


def test_a_coupling_above_the_share_is_flagged_and_says_so():
    c = Coupling(0, 1, 20.0, 50, 50.0)
    assert c.share == 0.4 and c.flagged() and FLAG_SHARE == 0.3
    assert describe(c, ["zone1", "zone2"]).endswith("flagged, above 30 %")
    assert Coupling(0, 1, 20.0, 50, None).share is None
    assert couplings({}, {(0, 1): np.ones(3)}, {1: 10}) == []  # too few frames: no figure


def test_pads_of_one_slider_are_neighbours_shown_not_flagged_and_a_key_outside_stays_flagged():
    # Hand-worked: pads 0 and 1 form slider "level", key 2 is outside it. Touching pad 0 alone for 10
    # frames moves pad 1 by median(30..39) = 34.5 less its own untouched median 3 = 31.5 counts, 31.5 / 20 =
    # 158 % of its threshold 20: a finger on a slider covers two pads, so that is the slider working, not
    # crosstalk. The same touch moves key 2 by 9 counts, 9 / 20 = 45 % of its threshold: flagged (above 30 %).
    from processing.crosstalk import slider_of
    from processing.slider import SliderSpec

    deltas = np.zeros((10, 3))
    touched = np.zeros((10, 3), bool)
    touched[:, 0] = True
    deltas[:, 0] = 200
    deltas[:, 1] = np.arange(30, 40)  # median 34.5
    deltas[:, 2] = 9
    quiet = {1: np.array([2, 2, 3, 3, 3, 3, 3, 4, 4, 4]), 2: np.zeros(10)}  # medians 3 and 0
    sliders = [SliderSpec("level", (0, 1))]
    assert slider_of(sliders) == {(0, 1): "level", (1, 0): "level"}
    found = couplings(quiet, during_touches(deltas, touched), {1: 20, 2: 20}, sliders)
    by = {(c.source, c.target): c for c in found}
    pad = by[(0, 1)]
    assert pad.shift_counts == 31.5 and pad.share == pytest.approx(31.5 / 20)
    assert pad.neighbours and pad.slider == "level" and not pad.flagged() and not pad.flagged(0.0)
    assert describe(pad, ["lvl0", "lvl1", "stop"]).endswith("slider neighbours in level, not crosstalk")
    key = by[(0, 2)]
    assert key.shift_counts == 9 and key.slider is None and key.flagged()
    assert describe(key, ["lvl0", "lvl1", "stop"]).endswith("flagged, above 30 %")
    # a key's worst crosstalk comes from outside its slider: pad 1 has none, key 2 has pad 0's
    assert worst_by_target(found) == {2: key}
    # without the slider's definition the same pair is crosstalk again, and flagged
    again = couplings(quiet, during_touches(deltas, touched), {1: 20, 2: 20})
    plain = {(c.source, c.target): c for c in again}
    assert plain[(0, 1)].flagged() and worst_by_target(list(plain.values()))[1] == plain[(0, 1)]
