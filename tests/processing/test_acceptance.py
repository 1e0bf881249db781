"""The production check's verdicts from synthetic frames (no port): directions, limits, stuck keys."""

from __future__ import annotations

import numpy as np

from processing.acceptance import FAIL, PASS, UNCHECKED, UnitProbe, evaluate, missing_limits
from processing.profile import profile_for
from processing.session import Session
from processing.settings import ChannelSettings, Limits
from protocol.events import BoardInfo, FrameBlock

NAMES = ("a", "b", "c", "d")


def run(readings: np.ndarray, polarity: str, limits: Limits | list[Limits]) -> list:
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


def test_each_channel_is_judged_by_its_own_baseline_band():
    """Pads near 1,170 and 1,660 counts (the issue's example): one band for all (937..1992) passes pad a,
    a 1,170-count pad drifted to 1,660; each pad's own band (its count +-20 %) fails it."""
    rng = np.random.default_rng(11)
    r = frames(rng, base=1170)
    r[:, 0] += 490  # a: drifted to b's count
    r[:, 1] += 490  # b: a 1,660-count pad
    one_band = Limits(baseline_min_counts=937, baseline_max_counts=1992)
    assert all(v.checks["alive"] == PASS for v in run(r, "+", one_band))
    small = Limits(baseline_min_counts=936, baseline_max_counts=1404)  # 1,170 -20 % .. +20 %
    large = Limits(baseline_min_counts=1328, baseline_max_counts=1992)  # 1,660 -20 % .. +20 %
    v = run(r, "+", [small, large, small, small])
    assert [x.checks["alive"] for x in v] == [FAIL, PASS, PASS, PASS]
    assert "above the allowed 936..1404" in v[0].reasons[0]


def test_missing_limits_names_what_each_channel_lacks():
    full = Limits(max_noise_pp_counts=9.0, baseline_min_counts=1, baseline_max_counts=9, min_snr_pp=5.0)
    no_noise = Limits(baseline_min_counts=1, baseline_max_counts=9, min_snr_pp=5.0)
    assert missing_limits([full, no_noise, Limits()], touch=False) == {
        1: ["noise"], 2: ["baseline range", "noise"]}
    rms_only = Limits(max_noise_rms_counts=2.0, baseline_max_counts=9)
    assert missing_limits([rms_only], touch=True) == {0: ["SNR"]}
    assert missing_limits([full], touch=True) == {}
