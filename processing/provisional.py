"""Provisional settings for a channel nobody has tuned: the rule, and how a quiet stretch is recognised.

Pure functions, no state: `processing.startup` collects each channel's first quiet second and calls
them. The rule and the reasons for every number are in ALGORITHM.md, "Provisional settings".
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from processing.settings import MAX_COUNTS, MAX_DEBOUNCE_FRAMES, ChannelSettings

QUIET_S = 1.0  # the quiet stretch a channel's noise is measured over ...
QUIET_MIN_FRAMES = 32  # ... and at least this many frames (a slow board needs longer than 1 s)
# T = max(2 x noise pp, 8 x noise RMS): twice the quiet span keeps a neighbour's crosstalk (a tenth of
# a touch on the demo panel) and the slow part of the noise a short window misses below it; 8 RMS is
# what 2 pp comes to for Gaussian noise over 60-100 frames (pp about 4.5-5 RMS), so it only decides
# when the window's pp came out low by chance or the noise is coarse. Since RMS <= pp / 2 for any
# numbers (Popoviciu's inequality), T <= 4 pp: a touch of 10 pp clears it with room for the noise.
THRESHOLD_PER_PP = 2
THRESHOLD_PER_RMS = 8
MIN_THRESHOLD_COUNTS = 3  # a quantised channel (pp 0 or 1) must not fire on one count of flicker
# Nor on a change too small to be a touch at its count scale: 1/400 = 0.25 % of the idle reading. Where
# the key has measurable noise the floor is capped at FLOOR_CAP_PER_PP x pp, so a touch of ten times the
# noise pp is detected whatever the reading's offset (a reading of 2e9 counts with a 1500-count touch).
FLOOR_DIVISOR = 400
FLOOR_CAP_PER_PP = 6
DEBOUNCE_S = 0.025  # touch and release debounce: 25 ms, rounded up to whole frames
# A stretch is quiet when its four quarters agree: their medians lie within the typical quarter's
# pp (plus one count for quantisation), and no quarter's pp exceeds SPIKE_FACTOR times the typical one
# (plus two counts).
QUARTERS = 4
SPIKE_FACTOR = 3


@dataclass(frozen=True, slots=True)
class QuietStats:
    """A channel's quiet stretch: what the provisional settings and the polarity learner start from."""

    frames: int
    seconds: float  # host time from its first frame to its last
    level_counts: float  # mean reading
    pp_counts: int  # max - min of the readings
    rms_counts: float  # population standard deviation of the readings
    rate_hz: float | None  # frames per second over the stretch (None if its frames share one time)

    @staticmethod
    def of(readings: np.ndarray, t_s: np.ndarray) -> QuietStats:
        r = np.asarray(readings, np.int64)
        seconds = float(t_s[-1] - t_s[0]) if len(t_s) else 0.0
        rate = (len(r) - 1) / seconds if seconds > 0 else None
        return QuietStats(len(r), seconds, float(r.mean()), int(r.max() - r.min()), float(r.std()), rate)


def is_quiet(readings: np.ndarray) -> bool:
    """Do these readings look like an untouched key (no step, no burst)? Compares its four quarters."""
    r = np.asarray(readings, np.int64)
    if len(r) < QUARTERS * 2:
        return False
    parts = np.array_split(r, QUARTERS)
    pps = np.array([int(p.max() - p.min()) for p in parts])
    medians = np.array([float(np.median(p)) for p in parts])
    typical = float(np.median(pps))
    level_ok = float(medians.max() - medians.min()) <= typical + 1
    burst_ok = int(pps.max()) <= SPIKE_FACTOR * typical + 2
    return level_ok and burst_ok


def debounce_frames(rate_hz: float | None, default: int = ChannelSettings().touch_debounce_frames) -> int:
    """DEBOUNCE_S in whole frames at `rate_hz`, rounded up, 1..255 (the default when the rate is unknown)."""
    if not rate_hz or not math.isfinite(rate_hz) or rate_hz <= 0:
        return default
    return max(1, min(MAX_DEBOUNCE_FRAMES, math.ceil(rate_hz * DEBOUNCE_S - 1e-9)))


def provisional_threshold(pp_counts: int, level_counts: float, rms_counts: float = 0.0) -> int:
    """T = max(2 pp, ceil(8 RMS), F, 3), at most MAX_COUNTS, with the floor F = ceil(|level| / 400),
    capped at 6 pp when pp >= 1 (only a key without a count of noise gets the whole floor)."""
    by_pp = THRESHOLD_PER_PP * int(pp_counts)
    by_rms = math.ceil(THRESHOLD_PER_RMS * rms_counts - 1e-9) if math.isfinite(rms_counts) else 0
    floor = -(-abs(round(level_counts)) // FLOOR_DIVISOR)
    if pp_counts >= 1:
        floor = min(floor, FLOOR_CAP_PER_PP * int(pp_counts))
    return min(MAX_COUNTS, max(by_pp, by_rms, floor, MIN_THRESHOLD_COUNTS))


def provisional_settings(stats: QuietStats, rate_hz: float | None = None,
                         base: ChannelSettings | None = None) -> ChannelSettings:
    """Threshold, hysteresis and debounce for a channel from its quiet stretch; the rest from `base`.

    Hysteresis is a third of the threshold (at least 1): the release level, two thirds of it, stays
    above the quiet noise (4/3 pp when the pp decides). `rate_hz` (the board's declared or measured rate)
    wins over the stretch's own estimate for the debounce.
    """
    threshold = provisional_threshold(stats.pp_counts, stats.level_counts, stats.rms_counts)
    debounce = debounce_frames(rate_hz or stats.rate_hz)
    return replace(base or ChannelSettings(), threshold_counts=threshold,
                   hysteresis_counts=max(1, threshold // 3), touch_debounce_frames=debounce,
                   release_debounce_frames=debounce)
