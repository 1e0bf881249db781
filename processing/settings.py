"""Per-channel detection settings (integer units, as the firmware stores them) and production limits.

`ChannelSettings.problems()` lists what is wrong as `(key, message)` pairs so the profile loader can
report `file:key: message`; the engine refuses settings with problems.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

from protocol import commands as wire
from protocol.commands import (  # noqa: F401  (re-exported: the ranges live in protocol/commands.py)
    MAX_COUNTS,
    MAX_DEBOUNCE_FRAMES,
    MAX_PERIOD_FRAMES,
    MAX_SHIFT,
    MAX_STUCK_FRAMES,
)


@dataclass(frozen=True, slots=True)
class ChannelSettings:
    """How one channel decides touched / released and how its baseline follows.

    A touch needs `delta >= threshold_counts` for `touch_debounce_frames` consecutive frames; a release
    needs `delta < threshold_counts - hysteresis_counts` for `release_debounce_frames` frames. The
    baseline is updated once every `baseline_period_frames` (a power of two) from the period's mean,
    moving 1/2**shift of the way: `baseline_slow_shift` toward touch, `baseline_fast_shift` away from it.
    `stuck_timeout_frames` releases and re-baselines a key held that long (0 = never).
    """

    threshold_counts: int = wire.DEFAULTS["threshold_counts"]
    hysteresis_counts: int = wire.DEFAULTS["hysteresis_counts"]
    touch_debounce_frames: int = wire.DEFAULTS["touch_debounce_frames"]
    release_debounce_frames: int = wire.DEFAULTS["release_debounce_frames"]
    baseline_slow_shift: int = wire.DEFAULTS["baseline_slow_shift"]
    baseline_fast_shift: int = wire.DEFAULTS["baseline_fast_shift"]
    baseline_period_frames: int = wire.DEFAULTS["baseline_period_frames"]
    stuck_timeout_frames: int = wire.DEFAULTS["stuck_timeout_frames"]

    @property
    def release_level_counts(self) -> int:
        return self.threshold_counts - self.hysteresis_counts

    @property
    def period_exp(self) -> int:
        return self.baseline_period_frames.bit_length() - 1

    def problems(self) -> list[tuple[str, str]]:
        """Every problem as (key, message): the wire's rules (`protocol.commands.settings_problems`), so a
        profile, the engine and a board refuse exactly the same values with the same words."""
        return wire.settings_problems({f.name: getattr(self, f.name) for f in fields(self)})

    def check(self) -> None:
        """Raise ValueError naming the first problem (the engine calls this; profiles report all)."""
        problems = self.problems()
        if problems:
            key, message = problems[0]
            raise ValueError(f"{key}: {message}")


SETTING_KEYS: tuple[str, ...] = tuple(f.name for f in fields(ChannelSettings))
if SETTING_KEYS != wire.SETTING_KEYS:  # the profile's keys are the wire's (PROTOCOL.md section 7)
    raise ImportError("processing.settings and protocol.commands disagree on the setting keys")


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

    def describe(self) -> str:
        """One line: `baseline 900..1400, noise pp <= 12, noise RMS <= 2.4, SNR pp >= 7` (what is set)."""
        parts = []
        lo, hi = self.baseline_min_counts, self.baseline_max_counts
        if lo is not None or hi is not None:
            parts.append(f"baseline {'-inf' if lo is None else lo}..{'inf' if hi is None else hi}")
        for key, words in (("max_noise_pp_counts", "noise pp <="), ("max_noise_rms_counts", "noise RMS <="),
                           ("min_snr_pp", "SNR pp >=")):
            value = getattr(self, key)
            if value is not None:
                parts.append(f"{words} {value:g}")
        return ", ".join(parts) or "none"


LIMIT_KEYS: tuple[str, ...] = tuple(f.name for f in fields(Limits))
