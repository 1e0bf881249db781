"""Per-channel detection settings (integer units, as the firmware stores them) and production limits.

`ChannelSettings.problems()` lists what is wrong as `(key, message)` pairs so the profile loader can
report `file:key: message`; the engine refuses settings with problems.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

MAX_COUNTS = 1 << 24  # readings and thresholds are assumed to fit comfortably in 32 bits
MAX_DEBOUNCE_FRAMES = 255
MAX_SHIFT = 16
MAX_PERIOD_FRAMES = 256  # must stay <= 2**FRAC_BITS so the period mean is exact
MAX_STUCK_FRAMES = (1 << 31) - 1


@dataclass(frozen=True, slots=True)
class ChannelSettings:
    """How one channel decides touched / released and how its baseline follows.

    A touch needs `delta >= threshold_counts` for `touch_debounce_frames` consecutive frames; a release
    needs `delta < threshold_counts - hysteresis_counts` for `release_debounce_frames` frames. The
    baseline is updated once every `baseline_period_frames` (a power of two) from the period's mean,
    moving 1/2**shift of the way: `baseline_slow_shift` toward touch, `baseline_fast_shift` away from it.
    `stuck_timeout_frames` releases and re-baselines a key held that long (0 = never).
    """

    threshold_counts: int = 100
    hysteresis_counts: int = 15
    touch_debounce_frames: int = 3
    release_debounce_frames: int = 3
    baseline_slow_shift: int = 6
    baseline_fast_shift: int = 2
    baseline_period_frames: int = 16
    stuck_timeout_frames: int = 0

    @property
    def release_level_counts(self) -> int:
        return self.threshold_counts - self.hysteresis_counts

    @property
    def period_exp(self) -> int:
        return self.baseline_period_frames.bit_length() - 1

    def problems(self) -> list[tuple[str, str]]:
        out: list[tuple[str, str]] = []
        for f in fields(self):
            value = getattr(self, f.name)
            if not isinstance(value, int) or isinstance(value, bool):
                out.append((f.name, f"must be a whole number, not {value!r}"))
        if out:
            return out
        if not 1 <= self.threshold_counts <= MAX_COUNTS:
            out.append(("threshold_counts",
                        f"must be between 1 and {MAX_COUNTS}, not {self.threshold_counts}"))
        if self.hysteresis_counts < 0:
            out.append(("hysteresis_counts", f"must not be negative ({self.hysteresis_counts})"))
        elif self.hysteresis_counts >= self.threshold_counts:
            out.append(("hysteresis_counts", f"{self.hysteresis_counts} must be below the threshold "
                        f"({self.threshold_counts}), or the key could never release"))
        for key in ("touch_debounce_frames", "release_debounce_frames"):
            value = getattr(self, key)
            if not 1 <= value <= MAX_DEBOUNCE_FRAMES:
                out.append((key, f"must be between 1 (react on the first frame) and {MAX_DEBOUNCE_FRAMES}, "
                            f"not {value}"))
        for key in ("baseline_slow_shift", "baseline_fast_shift"):
            value = getattr(self, key)
            if not 0 <= value <= MAX_SHIFT:
                out.append((key, f"must be between 0 and {MAX_SHIFT}, not {value}"))
        if self.baseline_fast_shift > self.baseline_slow_shift:
            out.append(("baseline_fast_shift",
                        f"{self.baseline_fast_shift} is slower than baseline_slow_shift "
                        f"({self.baseline_slow_shift}); the baseline must recover faster than it drifts"))
        p = self.baseline_period_frames
        if not 1 <= p <= MAX_PERIOD_FRAMES or p & (p - 1):
            out.append(("baseline_period_frames",
                        f"must be a power of two from 1 to {MAX_PERIOD_FRAMES}, not {p}"))
        if not 0 <= self.stuck_timeout_frames <= MAX_STUCK_FRAMES:
            out.append(("stuck_timeout_frames", f"must be 0 (never) or a positive frame count, "
                        f"not {self.stuck_timeout_frames}"))
        return out

    def check(self) -> None:
        """Raise ValueError naming the first problem (the engine calls this; profiles report all)."""
        problems = self.problems()
        if problems:
            key, message = problems[0]
            raise ValueError(f"{key}: {message}")


SETTING_KEYS: tuple[str, ...] = tuple(f.name for f in fields(ChannelSettings))


def is_positive_number(value: object) -> bool:
    """A finite number above zero (not a bool; NaN and infinity are refused: JSON and C cannot hold them)."""
    return isinstance(value, int | float) and not isinstance(value, bool) and 0 < value < math.inf


@dataclass(frozen=True, slots=True)
class Limits:
    """Acceptance limits for production checks. None means the limit is not checked."""

    max_noise_pp_counts: float | None = None
    max_noise_rms_counts: float | None = None
    min_snr_pp: float | None = None
    baseline_min_counts: int | None = None
    baseline_max_counts: int | None = None

    def problems(self) -> list[tuple[str, str]]:
        out: list[tuple[str, str]] = []
        for key in ("max_noise_pp_counts", "max_noise_rms_counts", "min_snr_pp"):
            value = getattr(self, key)
            if value is not None and not is_positive_number(value):
                out.append((key, f"must be a positive number, not {value!r}"))
        for key in ("baseline_min_counts", "baseline_max_counts"):
            value = getattr(self, key)
            if value is not None and (not isinstance(value, int) or isinstance(value, bool)):
                out.append((key, f"must be a whole number, not {value!r}"))
        lo, hi = self.baseline_min_counts, self.baseline_max_counts
        if isinstance(lo, int) and isinstance(hi, int) and lo >= hi:
            out.append(("baseline_max_counts", f"{hi} must be above baseline_min_counts ({lo})"))
        return out


LIMIT_KEYS: tuple[str, ...] = tuple(f.name for f in fields(Limits))
