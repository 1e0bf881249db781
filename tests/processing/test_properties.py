"""Properties of the detector over generated traces (hypothesis): debounce, hysteresis, fast == plain."""

from dataclasses import replace

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from processing.detections import KeyState, Rebaselined, Release, StuckRelease, Touch
from processing.engine import Engine
from processing.reference import PlainEngine
from processing.settings import ChannelSettings
from tests.processing.helpers import blocks

REPORTED = (KeyState.TOUCHED, KeyState.RELEASING)


@st.composite
def channel_settings(draw):
    threshold = draw(st.integers(5, 300))
    slow = draw(st.integers(0, 10))
    return ChannelSettings(
        threshold_counts=threshold,
        hysteresis_counts=draw(st.integers(0, threshold - 1)),
        touch_debounce_frames=draw(st.integers(1, 6)),
        release_debounce_frames=draw(st.integers(1, 6)),
        baseline_slow_shift=slow,
        baseline_fast_shift=draw(st.integers(0, slow)),
        baseline_period_frames=draw(st.sampled_from([1, 2, 4, 8, 16, 32])),
        stuck_timeout_frames=draw(st.sampled_from([0, 0, 5, 40, 200])),
    )


@st.composite
def traces(draw, max_channels=5):
    channels = draw(st.integers(1, max_channels))
    segments = draw(st.lists(st.tuples(st.integers(-400, 700), st.integers(1, 60)), min_size=1, max_size=10))
    noise = draw(st.integers(0, 30))
    seed = draw(st.integers(0, 2**16))
    rng = np.random.default_rng(seed)
    level = np.concatenate([np.full(n, v) for v, n in segments])
    readings = 5000 + level[:, None] + rng.integers(-noise, noise + 1, (len(level), channels))
    readings[:, ::2] += rng.integers(-50, 50)  # channels differ
    setts = [draw(channel_settings()) for _ in range(channels)]
    if draw(st.booleans()):  # one period for all channels: the fast engine's whole-period path
        setts = [replace(s, baseline_period_frames=setts[0].baseline_period_frames) for s in setts]
    polarity = [draw(st.sampled_from([1, -1])) for _ in range(channels)]
    sizes = draw(st.lists(st.integers(1, 300), min_size=1, max_size=5))
    rebase = draw(st.lists(st.integers(0, len(level)), max_size=2))
    return readings.astype(np.int64), setts, polarity, sizes, rebase


def run(cls, readings, setts, polarity, sizes, rebase, edits=()):
    e = cls(readings.shape[1], setts, polarity)
    events, deltas, states = [], [], []
    for b in blocks(readings, sizes):
        if any(b.first_index <= r < b.first_index + len(b) for r in rebase):
            which = b.first_index % (readings.shape[1] + 1)  # one channel, or all of them
            e.rebaseline(which if which < readings.shape[1] else None)
        for at, ch, s in edits:
            if b.first_index <= at < b.first_index + len(b):
                e.set_settings(ch, s)
        events += e.process(b)
        deltas.append(e.last_deltas)
        states.append(e.last_states)
    return e, events, np.concatenate(deltas), np.concatenate(states)


FAST = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@FAST
@given(traces(), st.data())
def test_fast_engine_identical_to_plain(trace, data):
    readings, setts, polarity, sizes, rebase = trace
    edits = [(data.draw(st.integers(0, len(readings))), data.draw(st.integers(0, readings.shape[1] - 1)),
              data.draw(channel_settings())) for _ in range(data.draw(st.integers(0, 2)))]
    plain = run(PlainEngine, readings, setts, polarity, sizes, rebase, edits)
    fast = run(Engine, readings, setts, polarity, sizes, rebase, edits)
    assert plain[1] == fast[1]
    assert np.array_equal(plain[2], fast[2]) and np.array_equal(plain[3], fast[3])
    assert plain[0].baselines_fp == fast[0].baselines_fp and plain[0].states == fast[0].states


@FAST
@given(traces())
def test_touch_and_release_exactly_after_their_debounce(trace):
    # Never sooner (the N or M frames before the event all qualify) and never later (the frame before
    # them did not), unless a re-baseline or stuck release intervened.
    readings, setts, polarity, sizes, rebase = trace
    _, events, deltas, _ = run(PlainEngine, readings, setts, polarity, sizes, rebase)
    touched_at: dict[int, int] = {}
    special = {(ev.index, ev.channel) for ev in events if isinstance(ev, StuckRelease | Rebaselined)}

    def undisturbed(c: int, first: int, last: int) -> bool:
        return first >= 0 and not any((i, c) in special for i in range(first, last + 1))

    for ev in events:
        s, c = setts[ev.channel], ev.channel
        if isinstance(ev, Touch):
            n = s.touch_debounce_frames
            assert ev.index + 1 >= n
            assert (deltas[ev.index - n + 1:ev.index + 1, c] >= s.threshold_counts).all()
            if undisturbed(c, ev.index - n, ev.index):  # and not later: the frame before the run was low
                assert deltas[ev.index - n, c] < s.threshold_counts
            touched_at[c] = ev.index
        elif isinstance(ev, Release):
            m = s.release_debounce_frames
            assert ev.held_frames >= m and ev.index - touched_at.pop(c) == ev.held_frames
            assert (deltas[ev.index - m + 1:ev.index + 1, c] < s.release_level_counts).all()
            if undisturbed(c, ev.index - m, ev.index):
                assert deltas[ev.index - m, c] >= s.release_level_counts
        elif isinstance(ev, StuckRelease | Rebaselined):
            touched_at.pop(c, None)


@FAST
@given(traces())
def test_no_toggle_while_delta_inside_hysteresis_band(trace):
    readings, setts, polarity, sizes, _rebase = trace
    _, events, deltas, states = run(PlainEngine, readings, setts, polarity, sizes, [])
    special = {(ev.index, ev.channel) for ev in events if isinstance(ev, StuckRelease | Rebaselined)}
    for c, s in enumerate(setts):
        reported = np.isin(states[:, c], REPORTED)
        band = (deltas[:, c] >= s.release_level_counts) & (deltas[:, c] < s.threshold_counts)
        for i in np.flatnonzero(band[1:]) + 1:
            if (int(i), c) not in special:
                assert reported[i] == reported[i - 1], (c, int(i))


def test_band_oscillation_never_toggles():
    # Directed case: touched, then the delta wanders only inside [T - H, T): stays touched throughout.
    s = ChannelSettings(threshold_counts=100, hysteresis_counts=30, touch_debounce_frames=2,
                        release_debounce_frames=1, baseline_period_frames=256)
    band = [1070, 1099, 1085, 1070, 1099] * 40
    for cls in (PlainEngine, Engine):
        e = cls(1, [s], [1])
        events = e.process(next(blocks(np.array([1000, 1200, 1200, *band])[:, None], [1000])))
        assert [type(ev) for ev in events] == [Rebaselined, Touch]
        assert e.states == [KeyState.TOUCHED]
