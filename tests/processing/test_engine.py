"""The detection state machine, worked by hand against ALGORITHM.md, and both engines on the same input."""

from dataclasses import replace

import numpy as np
import pytest

from processing.detections import KeyState, Rebaselined, Release, StuckRelease, Touch
from processing.engine import Engine
from processing.reference import PlainEngine
from processing.settings import ChannelSettings
from tests.processing.helpers import block

ENGINES = [PlainEngine, Engine]
# Baseline frozen for these hand-worked cases: a huge period and maximal shifts barely move it.
STILL = ChannelSettings(threshold_counts=100, hysteresis_counts=20, touch_debounce_frames=3,
                        release_debounce_frames=2, baseline_slow_shift=16, baseline_fast_shift=16,
                        baseline_period_frames=256)


def run(cls, readings, settings=STILL, polarity=(1,)):
    readings = np.asarray(readings, np.int64).reshape(len(readings), -1)
    e = cls(readings.shape[1], [settings] * readings.shape[1], list(polarity) * readings.shape[1])
    events = e.process(block(readings))
    return e, [ev for ev in events if not isinstance(ev, Rebaselined)]


@pytest.mark.parametrize("cls", ENGINES)
def test_touch_needs_n_frames_and_release_m_frames(cls):
    # Hand-worked: baseline 1000 from frame 0. Frames 1-2 reach 100 then drop: no touch (debounce 3).
    # Frames 4-6 at delta 150: touch on frame 6 (the third). Frame 8 delta 70 (< 80 = T - H) once, then
    # back: no release. Frames 10-11 below 80: release on frame 11, held 11 - 6 = 5 frames.
    deltas = [0, 100, 100, 0, 150, 150, 150, 150, 70, 150, 70, 10, 0]
    e, events = run(cls, [1000 + d for d in deltas])
    assert events == [Touch(0, 6, 0.06, 150), Release(0, 11, 0.11, pytest.approx(0.05), 5, 10)]
    assert e.states == [KeyState.RELEASED]


@pytest.mark.parametrize("cls", ENGINES)
def test_states_pass_through_confirming_and_releasing(cls):
    e, _ = run(cls, [1000, 1150])
    assert e.states == [KeyState.CONFIRMING]
    e, _ = run(cls, [1000, 1150, 1150, 1150, 1050])
    assert e.states == [KeyState.RELEASING]


@pytest.mark.parametrize("cls", ENGINES)
def test_negative_polarity_counts_a_drop_as_touch(cls):
    _e, events = run(cls, [1000, 850, 850, 850, 990, 990], polarity=(-1,))
    assert [type(ev) for ev in events] == [Touch, Release]
    assert events[0].delta_counts == 150


@pytest.mark.parametrize("cls", ENGINES)
def test_stuck_timeout_releases_and_rebaselines(cls):
    s = ChannelSettings(threshold_counts=100, hysteresis_counts=20, touch_debounce_frames=1,
                        release_debounce_frames=1, baseline_period_frames=256, stuck_timeout_frames=10)
    e, events = run(cls, [1000] + [1300] * 15, s)
    assert isinstance(events[0], Touch) and events[0].index == 1
    assert isinstance(events[1], StuckRelease) and events[1].index == 11 and events[1].held_frames == 10
    assert len(events) == 2 and e.deltas == [0] and e.baselines_fp == [1300 * 256]


@pytest.mark.parametrize("cls", ENGINES)
def test_rebaseline_on_demand_releases_a_touched_key(cls):
    e = cls(2, [STILL, STILL], [1, 1])
    e.process(block(np.array([[1000, 1000]] + [[1200, 1000]] * 4)))
    assert e.states[0] == KeyState.TOUCHED
    e.rebaseline(0)
    events = e.process(block(np.array([[1200, 1000]]), first_index=5))
    assert events == [Rebaselined(0, 5, 0.05, True)]
    assert e.states == [KeyState.RELEASED, KeyState.RELEASED] and e.baselines_fp == [1200 * 256, 1000 * 256]


@pytest.mark.parametrize("cls", ENGINES)
def test_powered_up_with_a_finger_recovers(cls):
    # The first reading (with a finger on) becomes the baseline; when the finger leaves, the delta is
    # -300 and the baseline follows back at the fast rate (period 16, shift 2: about 64 frames).
    s = ChannelSettings(threshold_counts=100, hysteresis_counts=15)
    readings = [1300] * 20 + [1000] * 600 + [1250] * 30 + [1000] * 30
    e, events = run(cls, readings, s)
    assert [type(ev) for ev in events] == [Touch, Release]
    assert 620 <= events[0].index <= 623
    assert abs(e.baselines_fp[0] / 256 - 1000) < 2


@pytest.mark.parametrize("cls", ENGINES)
def test_baseline_frozen_while_touched(cls):
    s = ChannelSettings(threshold_counts=100, hysteresis_counts=15, baseline_period_frames=1)
    e, _ = run(cls, [1000] * 40 + [1200] * 500, s)
    assert e.states == [KeyState.TOUCHED] and e.baselines_fp == [1000 * 256]


def test_set_settings_live_and_refuses_bad_values():
    e = Engine(1, [STILL], [1])
    e.process(block(np.array([1000, 1060, 1060, 1060])))
    assert e.states == [KeyState.RELEASED]
    e.set_settings(0, ChannelSettings(threshold_counts=50, hysteresis_counts=10, touch_debounce_frames=1))
    assert isinstance(e.process(block(np.array([1060]), 4))[0], Touch)
    with pytest.raises(ValueError, match="hysteresis_counts"):
        e.set_settings(0, ChannelSettings(threshold_counts=50, hysteresis_counts=50))


def test_engine_refuses_wrong_width_and_polarity():
    with pytest.raises(ValueError, match="polarity"):
        Engine(1, [STILL], [0])
    e = Engine(2, [STILL, STILL], [1, 1])
    with pytest.raises(ValueError, match="channels"):
        e.process(block(np.array([[1, 2, 3]])))


def test_both_engines_expose_the_same_current_values():
    readings = np.array([[1000, 2000], [1010, 1990], [1200, 1700]])
    views = []
    for cls in ENGINES:
        e = cls(2, [STILL, STILL], [1, -1])
        e.process(block(readings))
        views.append((e.polarity, e.readings, e.baselines_fp, e.deltas, e.states, e.frames))
    assert views[0] == views[1]
    assert views[0][0] == [1, -1] and views[0][1] == [1200, 1700] and views[0][3] == [200, 300]


EDGE = ChannelSettings(threshold_counts=100, hysteresis_counts=30, touch_debounce_frames=1,
                       release_debounce_frames=1, baseline_slow_shift=16, baseline_fast_shift=16,
                       baseline_period_frames=256)


@pytest.mark.parametrize("cls", ENGINES)
@pytest.mark.parametrize("polarity", [1, -1])
def test_threshold_and_release_level_edges(cls, polarity):
    # ALGORITHM.md step 3: a touch at delta >= T (exactly 100 counts), none at T - 1; while touched,
    # delta exactly T - H (70) holds the touch, T - H - 1 (69) releases it (debounce 1 both ways).
    deltas = [0, 99, 100, 70, 70, 69, 99, 100]
    _e, events = run(cls, [5000 + polarity * d for d in deltas], EDGE, polarity=(polarity,))
    assert [(type(ev), ev.index, ev.delta_counts) for ev in events] == [
        (Touch, 2, 100), (Release, 5, 69), (Touch, 7, 100)]


@pytest.mark.parametrize("cls", ENGINES)
def test_delta_and_baseline_steps_truncate_toward_zero(cls):
    # Hand-worked with period 1 and both shifts 1 (ALGORITHM.md steps 2 and 5, C99 division):
    # frame 1 (1001) moves the baseline from 256000 by 256 / 2 = 128 to 256128 (1000.5 counts).
    # Frame 2 (1000): delta = -128 / 256 = 0 in C (floor would say -1); the baseline then halves the gap
    # 256064, 256032, ... 256002, 256001, and stays at 256001: -1 / 2 = 0 in C (floor: -1, reaching 256000).
    s = ChannelSettings(threshold_counts=100, hysteresis_counts=0, baseline_slow_shift=1,
                        baseline_fast_shift=1, baseline_period_frames=1)
    e = cls(1, [s], [1])
    seen = []
    for k, r in enumerate([1000, 1001] + [1000] * 12):
        e.process(block(np.array([r]), first_index=k))
        seen.append((e.deltas[0], e.baselines_fp[0]))
    assert seen[:4] == [(0, 256000), (1, 256128), (0, 256064), (0, 256032)]
    assert [b for _, b in seen[-4:]] == [256001] * 4 and all(d == 0 for d, _ in seen[2:])


@pytest.mark.parametrize("cls", ENGINES)
def test_readings_at_the_int32_limits(cls):
    # Readings span the whole int32 range (protocol/rules.py refuses wider ones): the delta of a jump from
    # INT32_MIN to INT32_MAX is 2^32 - 1 counts, exact in int64 on both paths, either polarity.
    lo, hi = -(2**31), 2**31 - 1
    s = replace(EDGE, threshold_counts=1 << 24, hysteresis_counts=0)
    _e, events = run(cls, [lo, hi, hi, lo], s)
    assert events == [Touch(0, 1, 0.01, 2**32 - 1), Release(0, 3, 0.03, pytest.approx(0.02), 2, 0)]
    e, events = run(cls, [hi, lo, lo, hi], s, polarity=(-1,))
    assert [ev.delta_counts for ev in events] == [2**32 - 1, 0]
    assert e.baselines_fp == [hi * 256]


@pytest.mark.parametrize("cls", ENGINES)
def test_settings_edited_mid_touch_keep_the_state_and_counts(cls):
    # A live edit changes the rule from the next frame on; the state and the running count stay.
    s = replace(EDGE, release_debounce_frames=3)
    e = cls(1, [s], [1])
    e.process(block(np.array([1000, 1200, 1200, 1050, 1050])))  # touched at 1, releasing: count 2 of 3
    assert e.states == [KeyState.RELEASING]
    e.set_settings(0, replace(s, release_debounce_frames=2))  # count 2 already meets the new 2 ...
    events = e.process(block(np.array([1050]), first_index=5))  # ... and the next low frame makes 3
    assert [(type(ev), ev.index, ev.held_frames) for ev in events] == [(Release, 5, 4)]
    e.process(block(np.array([1200]), first_index=6))
    assert e.states == [KeyState.TOUCHED]
    e.set_settings(0, replace(s, threshold_counts=300, hysteresis_counts=50))  # release level now 250
    events = e.process(block(np.array([1200]), first_index=7))
    assert e.states == [KeyState.RELEASING] and events == []


@pytest.mark.parametrize("cls", ENGINES)
def test_rebaseline_mid_confirm_and_mid_release(cls):
    s = replace(EDGE, touch_debounce_frames=3, release_debounce_frames=3)
    e = cls(1, [s], [1])
    e.process(block(np.array([1000, 1200, 1200])))  # confirming: 2 of 3
    e.rebaseline()
    events = e.process(block(np.array([1200, 1200, 1200, 1200]), first_index=3))
    assert events == [Rebaselined(0, 3, 0.03, False)]  # the count is gone; 1200 is the new zero
    e.process(block(np.array([1400, 1400, 1400, 1250]), first_index=7))  # touched at 9, releasing
    assert e.states == [KeyState.RELEASING]
    e.rebaseline(0)
    events = e.process(block(np.array([1250, 1250]), first_index=11))
    assert events == [Rebaselined(0, 11, 0.11, True)] and e.states == [KeyState.RELEASED]
