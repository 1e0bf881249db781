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
# T = ceil(1.5 x noise pp): about 8 x RMS for Gaussian noise over ~100 frames (pp ~ 5 RMS there), so
# noise alone never reaches it; a touch of 10 x pp clears it more than six times over.
THRESHOLD_PP_NUM, THRESHOLD_PP_DEN = 3, 2
MIN_THRESHOLD_COUNTS = 3  # a quantised channel (pp 0 or 1) must not fire on one count of flicker
# Nor on a change too small to be a touch at its count scale: 1/400 = 0.25 % of the idle reading.
FLOOR_DIVISOR = 400
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


def provisional_threshold(pp_counts: int, level_counts: float) -> int:
    """T = max(ceil(1.5 pp), ceil(|level| / 400), 3), at most MAX_COUNTS (integers only)."""
    noise = (THRESHOLD_PP_NUM * int(pp_counts) + THRESHOLD_PP_DEN - 1) // THRESHOLD_PP_DEN
    level = abs(round(level_counts))
    floor = -(-level // FLOOR_DIVISOR)
    return min(MAX_COUNTS, max(noise, floor, MIN_THRESHOLD_COUNTS))


def provisional_settings(stats: QuietStats, rate_hz: float | None = None,
                         base: ChannelSettings | None = None) -> ChannelSettings:
    """Threshold, hysteresis and debounce for a channel from its quiet stretch; the rest from `base`.

    Hysteresis is a third of the threshold (at least 1), so the release level sits at the noise pp
    above the quiet mean when the noise decides. `rate_hz` (the board's declared or measured rate)
    wins over the stretch's own estimate for the debounce.
    """
    threshold = provisional_threshold(stats.pp_counts, stats.level_counts)
    debounce = debounce_frames(rate_hz or stats.rate_hz)
    return replace(base or ChannelSettings(), threshold_counts=threshold,
                   hysteresis_counts=max(1, threshold // 3), touch_debounce_frames=debounce,
                   release_debounce_frames=debounce)
