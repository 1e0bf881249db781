"""The parts of a channel's first contact, each alone: run lengths, the quiet check, the provisional rule,
the polarity learner, the startup phases and the board clock."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from processing.boardtime import BoardClock
from processing.polarity import LEARNED, LOST, PolarityLearner, first_reaching, run_lengths
from processing.provisional import (
    QuietStats,
    debounce_frames,
    is_quiet,
    provisional_settings,
    provisional_threshold,
)
from processing.startup import LEARNING, MEASURING, READY, Learned, Lost, Measured, Startup


def test_run_lengths_carry_across_blocks():
    mask = np.array([True, True, False, True, True, True])
    assert run_lengths(mask, 0).tolist() == [1, 2, 0, 1, 2, 3]
    assert run_lengths(mask, 5).tolist() == [6, 7, 0, 1, 2, 3]
    assert first_reaching(run_lengths(mask, 0), 3) == 5 and first_reaching(run_lengths(mask, 1), 3) == 1


@given(st.lists(st.booleans(), max_size=60), st.integers(0, 5))
def test_run_lengths_match_a_plain_loop(bits, carried):
    run, want = carried, []
    for b in bits:
        run = run + 1 if b else 0
        want.append(run)
    assert run_lengths(np.array(bits, bool), carried).tolist() == want


def test_the_threshold_rule_by_hand():
    # T = max(2 pp, ceil(8 RMS), ceil(|level| / 400), 3): worked by hand for each term winning.
    assert provisional_threshold(6, 1366.0, 1.2) == 12  # 2 x 6 = 12 (8 x 1.2 = 9.6 -> 10; 1366/400 -> 4)
    assert provisional_threshold(6, 1366.0, 2.0) == 16  # uniform noise of 7 levels: RMS 2, 8 x 2 = 16
    assert provisional_threshold(3, 1366.0, 1.01) == 9  # 8.08 rounds up
    assert provisional_threshold(0, 30000.0) == 75  # a perfectly quiet 30000-count key: 0.25 % of it
    assert provisional_threshold(1, 72.0) == 3  # a quantised 72-count key: the 3-count minimum
    assert provisional_threshold(0, 0.0) == 3
    assert provisional_threshold(0, -30000.0) == 75  # a board printing negative readings
    # With a count of noise the floor is capped at 6 pp: 30000 with pp 1 gets min(75, 6) = 6; a raw
    # capture near -2^31 with pp 100 gets min(5368700, 600) = 600, not 0.25 % of its offset.
    assert provisional_threshold(1, 30000.0) == 6
    assert provisional_threshold(100, -2147480000.0, 25.0) == 600
    assert provisional_threshold(2**40, 0.0) == 2**24  # never above what the engine takes


def test_provisional_settings_by_hand():
    stats = QuietStats(101, 1.0, 1366.0, 6, 1.0, 100.0)
    s = provisional_settings(stats)
    assert (s.threshold_counts, s.hysteresis_counts) == (12, 4)  # release level 8: 4/3 of the noise pp
    assert s.touch_debounce_frames == s.release_debounce_frames == 3  # 25 ms at 100 Hz: 2.5 -> 3
    assert provisional_settings(stats, rate_hz=1000.0).touch_debounce_frames == 25
    assert not s.problems()
    # the debounce: 25 ms rounded up to whole frames (60 Hz: 1.5 -> 2, 40 Hz: exactly 1, 10 Hz: 1)
    assert [debounce_frames(r) for r in (60.0, 50.0, 40.0, 10.0, 1000.0, 20000.0)] == [2, 2, 1, 1, 25, 255]
    assert debounce_frames(None) == 3 and debounce_frames(float("nan")) == 3


@given(st.integers(0, 10**6), st.floats(-2e6, 2e6, allow_nan=False), st.floats(1.0, 5000.0))
def test_provisional_settings_are_always_valid(pp, level, rate):
    s = provisional_settings(QuietStats(101, 1.0, level, pp, pp / 5, rate))
    assert not s.problems(), s
    assert s.threshold_counts >= 3 and 1 <= s.hysteresis_counts < s.threshold_counts
    # never above 4 pp (RMS <= pp / 2, Popoviciu) unless the floor or the minimum decides
    assert s.threshold_counts <= max(4 * pp, -(-abs(round(level)) // 400), 3)
    if pp >= 1:  # the floor is capped at 6 pp: the 10 x pp promise holds at any offset
        assert s.threshold_counts <= max(6 * pp, 3)


def test_quiet_check_takes_noise_and_hum_and_refuses_steps_and_taps():
    rng = np.random.default_rng(5)
    t = np.arange(100) / 100.0
    gauss = 1000 + np.round(rng.normal(0, 2, 100)).astype(int)
    hum = 1000 + np.round(15 * np.sin(2 * math.pi * 10 * t)).astype(int)  # 60 Hz aliased to 10 Hz at 50 Hz
    assert is_quiet(gauss) and is_quiet(hum) and is_quiet(np.full(100, 72))
    assert is_quiet(72 + (np.arange(100) % 2))  # quantised flicker of one count
    step = gauss.copy()
    step[60:] += 40  # a finger landing in the last part
    tap = gauss.copy()
    tap[30:38] += 60  # a quick tap inside one quarter
    assert not is_quiet(step) and not is_quiet(tap)
    assert not is_quiet(np.full(6, 72))  # too short to tell


def test_learner_decides_on_the_return_only():
    learner = PolarityLearner(1000.0, threshold_counts=9, release_counts=6, touch_frames=3, release_frames=3,
                              max_out_frames=1000, follow_frames=200)
    readings = np.full(200, 1000)
    readings[50:90] = 700  # a falling touch of 40 frames
    assert learner.feed(readings[:80]) is None  # still touched: nothing decided
    verdict = learner.feed(readings[80:])
    assert verdict is not None and verdict.outcome == LEARNED and verdict.sign == -1
    assert verdict.row == 92 - 80 and verdict.swing_counts == 300  # the third frame back (row 92)


def test_learner_waits_out_blips_and_gives_up_on_a_level_that_stays():
    learner = PolarityLearner(1000.0, 9, 6, 3, 3, max_out_frames=100, follow_frames=200)
    readings = np.full(400, 1000)
    readings[20:22] = 1100  # two frames: not a clear excursion (three needed)
    readings[50:] = 1300  # a step that never comes back: the idle level moved
    verdict = learner.feed(readings)
    assert verdict is not None and verdict.outcome == LOST and verdict.sign == 0
    assert verdict.row == 52 + 100 - 3  # max_out_frames after the excursion began (row 50)


def test_learner_follows_slow_drift_while_it_waits():
    learner = PolarityLearner(1000.0, 9, 6, 3, 3, max_out_frames=1000, follow_frames=100)
    drift = 1000 + np.arange(3000) // 300  # +10 counts over 30 s: never a clear excursion
    assert learner.feed(drift) is None and learner.level > 1005


def test_startup_measures_then_learns_within_one_block():
    rng = np.random.default_rng(1)
    r = 1000 + rng.integers(-3, 4, (600, 2))
    r[300:340, 0] += 200  # channel 0 rises on touch
    t = np.arange(600) / 100.0
    s = Startup(2, need_noise=[True, True], need_polarity=[True, False])
    steps = s.advance(r, t)
    kinds = [(type(x), x.channel) for x in steps]
    assert kinds == [(Measured, 0), (Measured, 1), (Learned, 0)]
    measured, learned = steps[0], steps[2]
    assert measured.row == 100 and not measured.ready and steps[1].ready  # 1.0 s at 100 Hz: frames 0..100
    assert measured.stats.pp_counts == int(np.ptp(r[:101, 0]))  # numpy.ptp over the same frames
    assert learned.sign == 1 and learned.row == 342
    assert s.phase == [READY, READY] and not s.busy


def test_startup_slides_past_a_touch_in_the_first_second():
    r = np.full((400, 1), 1000)
    r[:40, 0] = 1300  # a finger on the key when the port opened, gone after 0.4 s
    steps = Startup(1, [True], [False]).advance(r, np.arange(400) / 100.0)
    assert len(steps) == 1 and steps[0].stats.pp_counts == 0 and steps[0].stats.level_counts == 1000
    assert steps[0].row > 100 and steps[0].settings.threshold_counts == 3


def test_startup_takes_the_quietest_second_when_none_is_quiet():
    # A key still warming up, its reading climbing 50 counts a second: no second looks quiet (each
    # quarter's median above the last), so after GIVE_UP_S (10 s) the quietest one seen is used rather
    # than waiting for ever. (A steady noise or hum, however big, is stationary: it counts as quiet.)
    t = np.arange(1200) / 100.0
    r = (1000 + np.arange(1200) // 2)[:, None]
    steps = Startup(1, [True], [False]).advance(r, t)
    assert len(steps) == 1 and steps[0].quietest and steps[0].row == 1000  # 10 s after the first frame
    # the level it idles at by then: frames 900..1000, mean of 1000 + k // 2 = 1000 + 47950 / 101 (by hand)
    assert steps[0].stats.pp_counts == 50 and steps[0].stats.level_counts == pytest.approx(1000 + 47950 / 101)


def test_startup_relearns_after_a_lost_excursion_and_on_request():
    r = np.full((1600, 1), 1000)
    r[200:, 0] = 1200  # the level moved for good
    r[1500:1530, 0] = 1500  # then a touch from the new level
    s = Startup(1, [False], [True])
    s.advance(r[:200], np.arange(200) / 100.0)
    assert s.phase == [LEARNING]
    steps = s.advance(r[200:], np.arange(200, 1600) / 100.0)
    assert [type(x) for x in steps] == [Lost, Measured, Learned] and steps[-1].sign == 1
    s.relearn(0)
    assert s.phase == [MEASURING] and s.busy
    assert s.polarity_given(0) and s.phase == [READY]


def test_board_clock_finds_millis_at_60_hz_despite_a_lost_frame():
    ms = np.round(np.arange(200) * 1000 / 60).astype(np.int64)  # millis() at 60 Hz: steps of 16 and 17
    ms = np.delete(ms, 50)  # one frame lost
    host = 5.0 + np.arange(len(ms)) / 60.0 + np.tile([0.0, 0.004, -0.003], 67)[:len(ms)]  # bursty arrival
    clock = BoardClock()
    assert clock.observe(ms[:30], host[:30]) is False  # under a second of host time: not yet
    assert clock.observe(ms[30:], host[30:]) is True
    assert clock.unit == "ms" and clock.rate_hz == pytest.approx(60.0, rel=1e-3)


def test_board_clock_after_a_backlog_read_in_one_go():
    # A first read holds every frame the OS buffered since the port opened, all stamped with the time the
    # read returned: only the last of them matches it. Taking the first frame's tick against that time made
    # 37 frames of 10 ms look like no time at all, and a 100 Hz millis() board was refused (1324 ticks/s).
    ms = 8123 + 10 * np.arange(600, dtype=np.int64)
    clock = BoardClock()
    for start in range(0, 600, 37):  # reads of 37 frames, each stamped when its last frame arrived
        stop = min(600, start + 37)
        clock.observe(ms[start:stop], np.full(stop - start, stop / 100.0 + 0.3))
    assert clock.unit == "ms" and clock.rate_hz == pytest.approx(100.0, rel=1e-3)


def test_board_clock_in_microseconds_and_a_unit_it_cannot_place():
    us = np.arange(0, 2_000_000, 1000, dtype=np.int64)  # micros() at 1 kHz
    clock = BoardClock()
    assert clock.observe(us, np.arange(len(us)) / 1000.0)
    assert clock.unit == "us" and clock.rate_hz == pytest.approx(1000.0)
    odd = BoardClock()  # a 32768 Hz tick counter: no power of ten of seconds
    ticks = np.arange(0, 200 * 328, 328, dtype=np.int64)
    assert odd.observe(ticks, np.arange(200) / 100.0) and odd.rate_hz is None and "32" in odd.refused


@settings(max_examples=60, deadline=None)
@given(st.floats(2.0, 2000.0), st.sampled_from([0, 2, 3, 6]), st.integers(200, 2000), st.integers(0, 199))
def test_board_clock_rate_within_a_percent(rate_hz, exp, lost_every, first_lost):
    # Reference: the rate the ticks were generated at (a clock of 10**exp ticks per second, rounded to
    # whole ticks); up to 0.5 % of the frames lost leave it within 1 %.
    n = max(64, int(2.5 * rate_hz))
    ticks = np.round(np.arange(n) * 10.0**exp / rate_hz).astype(np.int64)
    keep = np.ones(n, bool)
    keep[first_lost::lost_every] = False
    ticks, host = ticks[keep], (np.arange(n) / rate_hz)[keep]
    clock = BoardClock()
    clock.observe(ticks, host)
    if 10.0**exp / rate_hz < 1:  # a clock coarser than the frames (whole seconds at 10 Hz): repeats
        return
    # Frames lost without a sequence number cannot be told from a slower board (their share goes into the
    # estimate whole), and a clock as coarse as the frames can be a tick off at each end of the span:
    # the bound is those two, and 0.5 % besides (a 99.5 Hz board on a 100 Hz clock with 2 of 248 frames
    # lost reads 98.4 Hz: 0.8 % lost and 0.8 % of quantisation).
    lost_share = 1 - keep.sum() / n
    quantisation = 2 / max(1, int(ticks[-1] - ticks[0]))
    assert clock.unit is not None
    assert clock.rate_hz == pytest.approx(rate_hz, rel=lost_share + quantisation + 0.005)
