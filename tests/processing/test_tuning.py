"""Tuning from a recording (`processing.tuning`), without a subprocess: made-up keys with known noise and
touch steps, marks, a learned polarity, refusals and the production limits of a good unit.

References: the RMS of integer noise drawn evenly from -k..k is sqrt(((2k+1)^2 - 1) / 12), the standard
deviation of the discrete uniform distribution (any statistics handbook, e.g. Johnson, Kemp & Kotz,
"Univariate Discrete Distributions", 3rd ed., section 6.10); its peak-to-peak is 2k once the run is long
enough. The suggestion and limit rules (half the touch delta, 3x the noise, 70 % of the SNR) are common
practice, no source (see processing/suggest.py and `limits_from_result`).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from processing.profile import profile_for
from processing.recording_format import Mark, Recording
from processing.suggest import Refusal, Suggestion
from processing.tuning import MIN_FRAMES, limits_from_result, tune_recording
from protocol.errors import UserError
from protocol.events import BoardInfo
from tests.processing.helpers import block

RATE_HZ = 100.0
NAMES = ("pump", "valve")
BASE = (1000, 2000)
NOISE = (3, 5)  # +-k counts, evenly
STEP = (200, 120)  # touch deltas
TOUCHED = ((300, 400), (500, 600))  # frames


def readings(sign: int = 1, seed: int = 4, n: int = 800) -> np.ndarray:
    rng = np.random.default_rng(seed)
    r = np.column_stack([b + rng.integers(-k, k + 1, n) for b, k in zip(BASE, NOISE, strict=True)])
    for c, (start, stop) in enumerate(TOUCHED):
        r[start:stop, c] += sign * STEP[c]
    return r


def recording(r: np.ndarray, polarity: tuple[int, ...] = (1, 1),
              marks: list[Mark] | None = None) -> Recording:
    info = BoardInfo(0.0, {}, proto=1, channels=2, rate_hz=RATE_HZ, names=NAMES, polarity=polarity)
    return Recording("made-up.csv", 1, events=[info, block(r, rate_hz=RATE_HZ)], marks=marks or [])


def test_figures_and_suggestions_of_two_made_up_keys() -> None:
    result = tune_recording(recording(readings()))
    assert result.frames == 800 and result.rate_hz == RATE_HZ and not result.from_marks
    for key, k, step in zip(result.keys, NOISE, STEP, strict=True):
        f = key.figures
        assert f.noise_pp_counts == 2 * k
        expected_rms = math.sqrt(((2 * k + 1) ** 2 - 1) / 12)  # discrete uniform (handbook formula)
        assert f.noise_rms_counts == pytest.approx(expected_rms, rel=0.08)
        assert f.signal_counts == pytest.approx(step, abs=2)
        assert f.snr_pp == pytest.approx(f.signal_counts / f.noise_pp_counts)
        assert isinstance(key.outcome, Suggestion) and key.changed
        assert key.after.threshold_counts == pytest.approx(step / 2, abs=1)  # half the touch delta
        assert key.verdict == "solid"  # SNR pp above 10 (common practice)
        assert [tuple(s) for s in key.trace.stretches] == [TOUCHED[key.channel]]
    assert result.profile.settings_for(0) == result.keys[0].after
    assert result.profile.rate_hz == RATE_HZ


def test_marks_choose_the_touches_and_a_key_without_one_is_refused() -> None:
    marks = [Mark(0.5, "quiet-start"), Mark(2.5, "quiet-end"),
             Mark(3.0, "touch-start", "pump"), Mark(4.0, "touch-end", "pump")]
    result = tune_recording(recording(readings(), marks=marks))
    assert result.from_marks
    pump, valve = result.keys
    assert isinstance(pump.outcome, Suggestion) and pump.figures.signal_counts == pytest.approx(200, abs=2)
    assert isinstance(valve.outcome, Refusal) and "no touch found" in valve.outcome.reason
    assert valve.after == valve.before and not valve.changed


def test_a_polarity_nobody_states_is_learned_from_the_first_touch() -> None:
    result = tune_recording(recording(readings(sign=-1), polarity=()))
    assert result.profile.polarity == (-1, -1)  # counts fall on touch (as a discharged ADC sample does)
    assert all(isinstance(k.outcome, Suggestion) for k in result.keys)
    assert result.keys[1].figures.signal_counts == pytest.approx(120, abs=2)


def test_too_few_frames_and_a_profile_for_another_width_are_one_line_errors() -> None:
    with pytest.raises(UserError, match=f"only {MIN_FRAMES - 1} frames"):
        tune_recording(recording(readings(n=MIN_FRAMES - 1)))
    with pytest.raises(UserError, match="the profile is for 3 channels, the recording has 2"):
        tune_recording(recording(readings()), profile_for(3, ("a", "b", "c")))


def test_a_base_profile_keeps_its_other_settings() -> None:
    base = profile_for(2, NAMES)
    base = base.with_settings(1, replace(base.settings_for(1), stuck_timeout_frames=700))
    result = tune_recording(recording(readings()), base)
    assert result.profile.settings_for(1).stuck_timeout_frames == 700
    assert result.keys[1].before.stuck_timeout_frames == 700


def test_limits_of_a_good_unit_per_channel() -> None:
    r = readings()
    result = tune_recording(recording(r))
    common, own = limits_from_result(result, baseline_margin=0.2)
    snr = min(k.figures.snr_pp for k in result.keys)
    assert common.min_snr_pp == pytest.approx(0.7 * snr, abs=0.05)
    for c, (base, k) in enumerate(zip(BASE, NOISE, strict=True)):
        lim = own[c]
        # Each channel's own noise: pp 2k (uniform -k..k), the limit 3x it.
        assert lim.max_noise_pp_counts == 3 * 2 * k
        assert lim.max_noise_rms_counts == pytest.approx(3 * math.sqrt(((2 * k + 1) ** 2 - 1) / 12), rel=0.1)
        # Its own untouched range base-k..base+k widened by 20 %: the other pad's count is outside.
        assert lim.baseline_min_counts == math.floor((base - k) * 0.8)
        assert lim.baseline_max_counts == math.ceil((base + k) * 1.2)
        other = BASE[1 - c]
        assert not lim.baseline_min_counts <= other <= lim.baseline_max_counts
    assert common.baseline_min_counts == own[0].baseline_min_counts
    assert common.baseline_max_counts == own[1].baseline_max_counts


def test_a_perfectly_quiet_channel_gets_a_noise_limit_a_real_unit_can_meet() -> None:
    r = readings()
    r[:, 0] = np.where(np.arange(len(r)) // 100 % 4 == 3, 1200, 1000)  # quiet, then touched stretches
    result = tune_recording(recording(r))
    _, own = limits_from_result(result)
    assert result.keys[0].figures.noise_pp_counts == 0
    assert own[0].max_noise_pp_counts == 3.0  # one count, times three


def test_a_key_never_touched_is_unmeasured_and_marked() -> None:
    r = readings()
    r[500:600, 1] -= STEP[1]  # valve never touched
    result = tune_recording(recording(r))
    assert [k.name for k in result.unmeasured()] == ["valve"]
    assert result.profile.unmeasured() == (1,)
    assert result.profile.settings_for(1) == result.keys[1].before  # kept, not invented


def test_a_base_profiles_measured_key_keeps_its_claim_and_a_marked_one_is_cleared_when_measured() -> None:
    r = readings()
    r[500:600, 1] -= STEP[1]
    base = profile_for(2, NAMES).with_measured(0, False)
    result = tune_recording(recording(r), base)
    assert [k.name for k in result.unmeasured()] == ["valve"]  # not measured by this recording
    assert result.profile.unmeasured() == ()  # pump measured now; valve's base settings were measured
