"""Tuning suggestions. The rules are common practice, no source (see processing/suggest.py)."""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from processing.engine import Engine
from processing.settings import ChannelSettings
from processing.suggest import Refusal, Suggestion, longest_run, suggest
from tests.processing.helpers import block


def test_clean_key_gets_half_the_signal_with_reasons():
    rng = np.random.default_rng(5)
    quiet = rng.integers(-5, 6, 500)
    held = 300 + rng.integers(-10, 11, 300)
    s = suggest(quiet, held, rate_hz=100.0)
    assert isinstance(s, Suggestion)
    assert s.threshold_counts == 150  # half of the median touch delta (300)
    assert s.hysteresis_counts == round(150 * 0.15)
    assert 2 <= s.touch_debounce_frames <= 5 and 2 <= s.release_debounce_frames <= 5
    assert set(s.reasons) == {"threshold_counts", "hysteresis_counts", "touch_debounce_frames",
                              "release_debounce_frames"}
    assert "half" in s.reasons["threshold_counts"]
    assert not s.apply(ChannelSettings()).problems()


def test_threshold_raised_above_noise_when_half_is_too_low():
    quiet = np.array([0, 40, -40, 10] * 50)  # top 40, pp 80: floor 120
    held = np.full(100, 200)  # half = 100 < 120 <= 150 (3/4 of the signal)
    s = suggest(quiet, held, rate_hz=100.0)
    assert isinstance(s, Suggestion) and s.threshold_counts == 120
    assert s.threshold_counts - s.hysteresis_counts > 40  # the release level stays above the noise top


def test_refuses_when_the_signal_does_not_clear_the_noise():
    quiet = np.array([0, 40, -40, 10] * 50)
    r = suggest(quiet, np.full(100, 130), rate_hz=100.0)
    assert isinstance(r, Refusal) and "does not clear the noise" in r.reason
    r = suggest(quiet, np.full(100, 30), rate_hz=100.0)
    assert isinstance(r, Refusal) and "does not rise above" in r.reason
    r = suggest(quiet[:5], np.full(100, 300), rate_hz=100.0)
    assert isinstance(r, Refusal) and "at least 16" in r.reason


def test_debounce_spans_the_longest_burst_but_is_capped():
    quiet = np.zeros(400, np.int64)
    quiet[::7] = 1
    quiet[100:104] = 30  # a 4-frame burst
    s = suggest(quiet, np.full(100, 400), rate_hz=1000.0)
    assert s.touch_debounce_frames == 5 and "4 frames" in s.reasons["touch_debounce_frames"]
    quiet[200:290] = 30  # a 90-frame burst: capped at 50 ms = 5 frames at 100 Hz
    s = suggest(quiet, np.full(100, 400), rate_hz=100.0)
    assert s.touch_debounce_frames == 5 and "capped" in s.reasons["touch_debounce_frames"]
    assert longest_run(np.array([1, 1, 0, 1, 1, 1, 0], bool)) == 3


def test_suggestion_detects_the_touches_it_was_made_from():
    rng = np.random.default_rng(9)
    quiet = rng.normal(0, 6, 1000).round().astype(int)
    held = (220 + rng.normal(0, 8, 400)).round().astype(int)
    s = suggest(quiet, held, rate_hz=100.0)
    e = Engine(1, [s.apply(ChannelSettings())], [1])
    trace = np.concatenate([[5000], 5000 + quiet, 5000 + held, 5000 + quiet[:50]])
    events = e.process(block(trace))
    assert [type(ev).__name__ for ev in events] == ["Rebaselined", "Touch", "Release"]


def test_every_suggestion_is_a_valid_setting_at_the_edges():
    # A suggestion must always be something the engine accepts (ALGORITHM.md: threshold 1 .. 2^24,
    # hysteresis 0 .. threshold-1, debounce 1 .. 255), even for a tiny signal, a huge one or a fast board.
    tiny = suggest(np.full(20, -5), np.full(20, 2), rate_hz=100.0)  # threshold 1: no room for hysteresis
    huge = suggest(np.zeros(20, np.int64), np.full(20, 10**9), rate_hz=100.0)
    quiet = np.zeros(4000, np.int64)
    quiet[100:400] = 30  # a 300-frame burst at 20 kHz (15 ms): over the 255-frame debounce ceiling
    fast = suggest(quiet, np.full(20, 100), rate_hz=20000.0)
    for s in (tiny, huge, fast):
        assert isinstance(s, Suggestion)
        assert s.apply(ChannelSettings()).problems() == []
    assert tiny.threshold_counts == 1 and tiny.hysteresis_counts == 0
    assert fast.touch_debounce_frames == 255 and "capped" in fast.reasons["touch_debounce_frames"]
    assert "at most" in huge.reasons["threshold_counts"]


@settings(max_examples=300, deadline=None)
@given(st.lists(st.integers(-60, 60), min_size=16, max_size=80),
       st.lists(st.integers(-20, 400), min_size=16, max_size=80),
       st.sampled_from([10.0, 100.0, 1000.0, 50000.0]))
def test_suggestions_always_apply_cleanly(quiet, held, rate_hz):
    s = suggest(np.array(quiet), np.array(held), rate_hz)
    if isinstance(s, Suggestion):
        assert s.apply(ChannelSettings()).problems() == []
        assert s.threshold_counts - s.hysteresis_counts > max(quiet)  # the release level clears the noise


def test_reasons_read_well_when_nothing_was_seen_to_span():
    # A steady key: no noise burst and no dip while held; the reasons must not say "up to 0 frames".
    quiet = np.zeros(400, dtype=np.int64)
    quiet[::2] = 2
    held = np.full(200, 300)
    s = suggest(quiet, held, rate_hz=100.0)
    assert isinstance(s, Suggestion)
    assert "up to 0 frames" not in " ".join(s.reasons.values())
    assert "never dipped" in s.reasons["release_debounce_frames"]
