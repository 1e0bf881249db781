"""The production check's verdicts from synthetic frames (no port): directions, limits, stuck keys."""

from __future__ import annotations

import numpy as np

from processing.acceptance import FAIL, PASS, UNCHECKED, UnitProbe, evaluate
from processing.profile import profile_for
from processing.session import Session
from processing.settings import ChannelSettings, Limits
from protocol.events import BoardInfo, FrameBlock

NAMES = ("a", "b", "c", "d")


def run(readings: np.ndarray, polarity: str, limits: Limits) -> list:
    profile = profile_for(4, NAMES)
    profile = profile.with_settings(0, ChannelSettings(threshold_counts=40, hysteresis_counts=6))
    for c in range(1, 4):
        profile = profile.with_settings(c, ChannelSettings(threshold_counts=40, hysteresis_counts=6))
    session = Session(profile)
    probe = UnitProbe(session, 0.0)
    info = BoardInfo(0.0, {}, proto=1, channels=4, rate_hz=100.0, names=NAMES,
                     polarity=(1 if polarity == "+" else -1,), new_session=True)
    n = len(readings)
    probe.feed([info, FrameBlock(np.arange(n) / 100.0, np.arange(n), readings, 0)])
    return evaluate(probe, limits, list(NAMES), session.engine.pol.tolist(), touch=False)


def frames(rng, n=300, base=1000):
    return (base + rng.normal(0, 2, (n, 4))).round().astype(np.int64)


LIMITS = Limits(max_noise_pp_counts=30.0, baseline_min_counts=800, baseline_max_counts=1200)


def test_directions_of_open_and_shorted_pads_follow_the_polarity():
    rng = np.random.default_rng(1)
    r = frames(rng)
    r[:, 1] = 150  # far below the range
    r[:, 2] = 65535  # far above
    for pol, low, high in (("+", "open pad", "shorted pad"), ("-", "shorted pad", "open pad")):
        v = run(r.copy(), pol, LIMITS)
        assert [x.checks["alive"] for x in v] == [PASS, FAIL, FAIL, PASS]
        assert v[1].reasons[0].startswith(low) and "below the allowed 800..1200" in v[1].reasons[0]
        assert v[2].reasons[0].startswith(high) and "above" in v[2].reasons[0]


def test_noise_limit_and_unchecked_limits():
    rng = np.random.default_rng(2)
    r = frames(rng)
    r[:, 3] += rng.integers(-15, 16, 300)  # pp about 34 > 30
    v = run(r, "+", LIMITS)
    assert v[3].checks["noise"] == FAIL and v[3].reasons[0].startswith("noisy pad: noise pp")
    assert v[0].noise_pp_counts <= 30 and v[0].checks["noise"] == PASS
    bare = run(frames(rng), "+", Limits())
    assert all(x.checks == {"alive": UNCHECKED, "noise": UNCHECKED, "stuck": PASS} for x in bare)


def test_a_key_that_becomes_touched_with_hands_off_is_stuck():
    rng = np.random.default_rng(3)
    r = frames(rng)
    r[100:, 0] += 90  # touched from 1 s and held
    v = run(r, "+", LIMITS)
    assert v[0].checks["stuck"] == FAIL
    assert v[0].reasons[-1].startswith("stuck key: reported touched from 1.0")
    assert all(x.passed for x in v[1:])
