"""The settle guard: noise is measured only on released frames clear of touch activity.

Outside references: numpy.std / numpy.ptp and statistics.pstdev of the untouched stretches of a trace
built here (where the finger is, is known by construction), and a plain per-frame Python loop of the
stated rule for random traces split into random blocks.
"""

import statistics

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from processing.detections import KeyState
from processing.measure import Measures
from processing.profile import profile_for
from processing.session import Session
from protocol.events import BoardInfo, FrameBlock

RELEASED, CONFIRMING, TOUCHED, RELEASING = (int(KeyState.RELEASED), int(KeyState.CONFIRMING),
                                            int(KeyState.TOUCHED), int(KeyState.RELEASING))


def plain_selection(states: np.ndarray, guard: int, start: int = 0) -> list[int]:
    """The rule, frame by frame: a frame counts when it and every frame within `guard` of it (that exists)
    is released, it is not before `start`, and the `guard` frames after it have arrived."""
    n = len(states)
    return [i for i in range(start, n - guard)
            if all(states[j] == RELEASED for j in range(max(0, i - guard), min(n, i + guard + 1)))]


def ramp_trace(rng: np.random.Generator, ramp: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Quiet, a landing ramp (still released: under the threshold), a touch, a lifting ramp, quiet, another
    landing and a touch still held at the end. Returns deltas, states and the mask of the quiet frames."""
    parts = [("quiet", 1500), ("land", ramp), ("touch", 300), ("lift", ramp), ("quiet", 1500), ("land", ramp),
             ("touch", 100)]
    deltas, states, quiet = [], [], []
    for kind, n in parts:
        noise = rng.integers(-7, 8, n)  # pp 14 counts
        if kind == "quiet":
            deltas.append(noise)
            states.append(np.full(n, RELEASED))
        elif kind == "touch":
            deltas.append(300 + noise)
            s = np.full(n, TOUCHED)
            s[:3] = CONFIRMING
            if n == 300:
                s[-3:] = RELEASING
            states.append(s)
        else:  # the delta moves to or from the touch level while the state is still released
            ramp_counts = np.linspace(0, 90, n) if kind == "land" else np.linspace(90, 0, n)
            deltas.append(np.round(ramp_counts).astype(np.int64) + noise)
            states.append(np.full(n, RELEASED))
        quiet.append(np.full(n, kind == "quiet"))
    return np.concatenate(deltas), np.concatenate(states), np.concatenate(quiet)


def feed(m: Measures, deltas, states, block: int = 64, restart_frame: int | None = None) -> None:
    deltas = np.asarray(deltas, np.int64).reshape(len(deltas), -1)
    states = np.asarray(states, np.int8).reshape(len(states), -1)
    for pos in range(0, len(deltas), block):
        d, s = deltas[pos:pos + block], states[pos:pos + block]
        restart = None
        if restart_frame is not None and pos <= restart_frame < pos + len(d):
            restart = {0: restart_frame - pos}
        m.ingest((pos + np.arange(len(d))) / m.rate_hz, d + 1000, d, s, restart=restart)


def test_guarded_noise_is_numpy_std_and_ptp_of_the_untouched_stretches_only():
    # 1 kHz, 30 ms landing and lifting ramps, guard 30 ms: the window (10 s, longer than the trace) holds
    # exactly the two quiet stretches. Reference: numpy.std / numpy.ptp and statistics.pstdev of them.
    rng = np.random.default_rng(21)
    deltas, states, quiet = ramp_trace(rng, ramp=30)
    m = Measures(1, rate_hz=1000.0, window_s=10.0, settle_s=0.030, history_frames=8192)
    feed(m, deltas, states)
    untouched = deltas[quiet]
    noise = m.noise(0)
    assert noise.samples == len(untouched) == 3000
    assert noise.rms_counts == pytest.approx(float(np.std(untouched)), rel=1e-12)  # numpy.std
    assert noise.rms_counts == pytest.approx(statistics.pstdev(untouched.tolist()), rel=1e-12)  # stdlib
    assert noise.pp_counts == float(np.ptp(untouched)) <= 14  # numpy.ptp
    assert sorted(m.released_deltas(0).tolist()) == sorted(untouched.tolist())
    # without the guard the ramps count as noise: the same trace reads several times noisier
    bare = Measures(1, rate_hz=1000.0, window_s=10.0, settle_s=0.0, history_frames=8192)
    feed(bare, deltas, states)
    assert bare.noise(0).pp_counts >= 80 and bare.noise(0).samples == 3000 + 3 * 30


def test_a_lift_no_longer_turns_a_solid_key_weak():
    # The case that asked for the guard: a 1 kHz board, noise pp 14, a touch of 300 counts with 30 ms
    # ramps, through the real engine. The default guard (0.1 s) keeps the ramps out; every frame it keeps
    # lies in a quiet stretch (by construction), and the noise is numpy.std/ptp of exactly those frames.
    rng = np.random.default_rng(4)
    deltas, _, quiet = ramp_trace(rng, ramp=30)
    readings = (2000 + deltas).reshape(-1, 1).repeat(2, axis=1)
    info = BoardInfo(0.0, {}, proto=1, channels=2, rate_hz=1000.0, polarity=(1,), new_session=True)
    results = {}
    for settle_s in (0.1, 0.0):
        s = Session(profile_for(2), settle_s=settle_s, window_s=4.0)
        s.handle([info])
        for pos in range(0, len(readings), 50):
            rows = readings[pos:pos + 50]
            s.handle([FrameBlock((pos + np.arange(len(rows))) / 1000.0, np.arange(len(rows)), rows, pos)])
        results[settle_s] = s.rows()[0].quality
        if settle_s:
            h = s.measures.history
            _, _, d, states = h.last(len(h))
            kept = plain_selection(states[:, 0], s.measures.guard_frames)
            assert kept and all(quiet[i] for i in kept)
            ref = d[kept, 0]
            q = results[settle_s]
            assert q.noise.samples == len(ref)
            assert q.noise.rms_counts == pytest.approx(float(np.std(ref)), rel=1e-12)  # numpy.std
            # numpy.ptp; a little over the 14 generated: the baseline followed the landing ramps a few counts
            assert q.noise.pp_counts == float(np.ptp(ref)) < 2 * 14
    assert results[0.1].verdict == "solid"
    assert results[0.0].verdict != "solid" and results[0.0].noise.pp_counts > 4 * results[0.1].noise.pp_counts


@settings(max_examples=60, deadline=None)
@given(st.data())
def test_guard_matches_the_plain_rule_for_any_blocks_and_restart(data):
    # Reference: the rule as a plain per-frame loop (plain_selection) over the whole trace, window applied
    # afterwards; the measure decides frames block by block and must agree for every split.
    n = data.draw(st.integers(1, 400))
    guard = data.draw(st.integers(0, 12))
    block = data.draw(st.integers(1, 70))
    runs = data.draw(st.lists(st.tuples(st.sampled_from([RELEASED, TOUCHED, CONFIRMING]), st.integers(1, 40)),
                              min_size=1, max_size=20))
    states = np.concatenate([np.full(k, s) for s, k in runs])[:n]
    states = np.pad(states, (0, n - len(states)), constant_values=RELEASED)
    deltas = np.random.default_rng(n).integers(-50, 50, n)
    restart = data.draw(st.none() | st.integers(0, n - 1))
    m = Measures(1, rate_hz=100.0, window_s=0.5, settle_s=guard / 100.0)
    assert m.guard_frames == guard
    feed(m, deltas, states, block=block, restart_frame=restart)
    kept = plain_selection(states, guard, start=restart or 0)[-m.window_frames:]
    assert m.released_deltas(0).tolist() == deltas[kept].tolist()
    if restart is not None:
        assert m.noise_start_frame[0] == restart


def test_rebaseline_boundary_with_the_guard():
    # Hand-worked, 100 Hz, guard 0.1 s = 10 frames: 100 released frames at +40 (a lagging baseline), a
    # re-baseline at frame 100, then +-1 until frame 159. Only frames 100..149 count (the newest 10 wait):
    # pp 2, 50 samples; a touch at 160..169 then takes 150..159 out for good.
    m = Measures(1, rate_hz=100.0, window_s=2.0)
    deltas = [40] * 100 + [1, -1] * 30 + [200] * 10 + [0] * 5
    states = [RELEASED] * 160 + [TOUCHED] * 10 + [RELEASED] * 5
    feed(m, deltas[:160], states[:160], block=32, restart_frame=100)
    assert m.noise_start_frame[0] == 100
    noise = m.noise(0)
    assert (noise.samples, noise.pp_counts) == (50, 2)
    feed_more = np.asarray(deltas[160:], np.int64).reshape(-1, 1)
    m.ingest(np.arange(160, 175) / 100.0, feed_more + 1000, feed_more,
             np.asarray(states[160:], np.int8).reshape(-1, 1))
    assert m.noise(0).samples == 50 and m.released_deltas(0).tolist() == deltas[100:150]


def test_qualities_for_all_channels_against_numpy_std():
    # Moved from tests/tui (the screen now uses Measures.qualities): every channel's noise RMS is the
    # population standard deviation (numpy.std) of the frames the rule selects, including channels whose
    # window is not full yet; qualities() agrees with the per-channel quality() too.
    rng = np.random.default_rng(5)
    m = Measures(channels=6, rate_hz=100.0, window_s=1.0, history_frames=1024, any_key=False)
    for block in range(8):
        n = 97
        deltas = rng.normal(0, 3 + np.arange(6), size=(n, 6)).round().astype(np.int64)
        states = np.zeros((n, 6), np.int8)
        if block in (3, 4):
            states[:, 2] = KeyState.TOUCHED
            deltas[:, 2] += 80
        if block < 7:
            states[:, 5] = KeyState.TOUCHED  # released only in the last block: its window is not full
        states[10:20, 4] = KeyState.CONFIRMING
        m.ingest(np.arange(n) / 100.0 + block, 1000 + deltas, deltas, states)
    fast = m.qualities()
    _, _, d, s = m.history.last(len(m.history))
    for c in range(6):
        kept = plain_selection(s[:, c], m.guard_frames)[-m.window_frames:]
        ref, per_channel = d[kept, c], m.quality(c)
        assert fast[c].noise.samples == len(ref) == per_channel.noise.samples
        assert fast[c].noise.rms_counts == pytest.approx(float(np.std(ref)), rel=1e-12)  # numpy.std
        assert fast[c].noise.pp_counts == float(np.ptp(ref)) == per_channel.noise.pp_counts
        assert (fast[c].verdict, fast[c].snr_pp) == (per_channel.verdict, per_channel.snr_pp)
    assert fast[5].noise.samples < m.window_frames == fast[0].noise.samples


def test_guard_follows_the_frame_rate_and_refuses_a_negative_length():
    m = Measures(1, rate_hz=100.0)
    assert m.guard_frames == 10
    m.rate_hz = 1000.0
    assert m.guard_frames == 100 and m._gate.guard_frames == 100
    with pytest.raises(ValueError, match="settle guard"):
        Measures(1, rate_hz=100.0, settle_s=-0.1)


def test_another_keys_touch_is_not_noise_plain_rule_over_all_keys():
    # Issue 12: a frame counts as a key's noise only when every key is released (clear by the guard).
    # Reference: the same plain per-frame loop, over the "any key busy" state, and numpy.std of those frames.
    rng = np.random.default_rng(9)
    m = Measures(channels=3, rate_hz=100.0, window_s=3.0, history_frames=1024)
    deltas = rng.normal(0, 2, size=(300, 3)).round().astype(np.int64)
    states = np.zeros((300, 3), np.int8)
    states[100:160, 0] = TOUCHED
    deltas[100:160, 0] += 200
    deltas[95:165, 1] += 40  # the neighbour moves key 1 by crosstalk, still released
    for a in range(0, 300, 64):
        m.ingest(np.arange(a, min(a + 64, 300)) / 100.0, 1000 + deltas[a:a + 64], deltas[a:a + 64],
                 states[a:a + 64])
    any_busy = np.where((states != RELEASED).any(axis=1), TOUCHED, RELEASED)
    kept = plain_selection(any_busy, m.guard_frames)
    q = m.quality(1)
    assert q.noise is not None and q.noise.samples == len(kept)
    assert q.noise.rms_counts == pytest.approx(float(np.std(deltas[kept, 1])))
    assert q.noise.pp_counts < 20  # the 40-count crosstalk is out
    per_key = Measures(channels=3, rate_hz=100.0, window_s=3.0, history_frames=1024, any_key=False)
    per_key.ingest(np.arange(300) / 100.0, 1000 + deltas, deltas, states)
    assert per_key.quality(1).noise.pp_counts >= 40  # the old rule counted it


def test_the_verdict_says_what_it_rests_on():
    m = Measures(channels=2, rate_hz=100.0, window_s=1.0)
    states = np.zeros((400, 2), np.int8)
    deltas = np.zeros((400, 2), np.int64)
    for a, b in ((50, 80), (150, 190), (300, 310)):  # three touches of key 0: 30 + 40 + 10 frames
        states[a:b, 0] = TOUCHED
        deltas[a:b, 0] = 100
    deltas[:, 1] = np.tile([0, 1], 200)
    for a in range(0, 400, 37):  # blocks that split touches
        m.ingest(np.arange(a, min(a + 37, 400)) / 100.0, deltas[a:a + 37] + 1000, deltas[a:a + 37],
                 states[a:a + 37])
    q = m.quality(0)
    assert (q.touches, q.touched_frames) == (3, 80)
    assert q.basis() == f"3 touches (80 frames), noise of {q.noise.samples} frames"
    assert m.qualities()[0].touches == 3 and m.qualities()[1].touches == 0
    m.clear_touch_signal(0)
    assert m.quality(0).touches == 0
