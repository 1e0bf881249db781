"""The editable settings of a channel: their labels, units and step sizes; pure.

Stepping and typed values go through `ChannelSettings.problems()`, so the screen refuses exactly what
the engine and the profile loader would refuse, with the same reason. The channel's polarity is one
more field of the edit bar (`EDIT_FIELDS`), though not a `ChannelSettings` value: its edits carry a
`PolarityChoice` through the same undo history.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from fractions import Fraction

from processing.settings import ChannelSettings
from tui.words import unit_word, with_unit


@dataclass(frozen=True, slots=True)
class Field:
    key: str
    label: str  # the full name: prompts, the detail panel, the selected field in the edit bar
    short: str  # its name inside its group on the edit bar ("touch" under "debounce")
    unit: str
    fine: int
    coarse: int
    doubling: bool = False  # steps multiply or divide by two (powers of two only)
    group: str = ""  # the edit bar's heading for related fields ("debounce", "baseline")


FIELDS: tuple[Field, ...] = (
    Field("threshold_counts", "threshold", "threshold", "counts", 1, 10),
    Field("hysteresis_counts", "hysteresis", "hysteresis", "counts", 1, 10),
    Field("touch_debounce_frames", "touch debounce", "touch", "frames", 1, 5, group="debounce"),
    Field("release_debounce_frames", "release debounce", "release", "frames", 1, 5, group="debounce"),
    Field("baseline_slow_shift", "follow toward touch", "slow", "shift", 1, 2, group="baseline"),
    Field("baseline_fast_shift", "follow away", "fast", "shift", 1, 2, group="baseline"),
    Field("baseline_period_frames", "baseline period", "every", "frames", 1, 1, doubling=True,
          group="baseline"),
    Field("stuck_timeout_frames", "stuck timeout", "stuck after", "frames", 100, 1000),
)
_BY_KEY = {f.key: f for f in FIELDS}
# What a channel nobody has tuned gets from its first quiet second (processing.provisional): until that
# is measured these are not in force, and the screen shows them as not known yet rather than the
# defaults they will replace (tests/tui/test_editor.py checks this against `provisional_settings`).
FROM_NOISE = frozenset({"threshold_counts", "hysteresis_counts", "touch_debounce_frames",
                        "release_debounce_frames"})
POLARITY_KEY = "polarity"
POLARITY_FIELD = Field(POLARITY_KEY, "polarity", "polarity", "", 1, 1)
EDIT_FIELDS: tuple[Field, ...] = (*FIELDS, POLARITY_FIELD)  # the edit bar's fields, left to right


@dataclass(frozen=True, slots=True)
class PolarityChoice:
    """A channel's direction as an edit holds it: +1 counts rise on touch, -1 they fall, None learn it."""

    sign: int | None


def polarity_word(sign: int | None) -> str:
    return "?" if sign is None else "+" if sign > 0 else "-"


def polarity_meaning(sign: int | None) -> str:
    if sign is None:
        return "learning: touch the key once"
    return "counts rise on touch" if sign > 0 else "counts fall on touch"


def parse_polarity(text: str) -> int | None:
    """`+` or `-` (or rise / fall), `?` to learn it again; ValueError with a one-line reason."""
    word = text.strip().lower()
    if word in ("+", "rise", "up"):
        return 1
    if word in ("-", "fall", "down"):
        return -1
    if word in ("?", "learn"):
        return None
    raise ValueError(f"polarity must be + (counts rise on touch), - (they fall) or ? (learn it from the "
                     f"next touch), not {text.strip()!r}")


def field(key: str) -> Field:
    return POLARITY_FIELD if key == POLARITY_KEY else _BY_KEY[key]


def refusal(settings: ChannelSettings) -> str | None:
    """Why these settings cannot be used (the first problem, one line), or None when they can."""
    problems = settings.problems()
    if not problems:
        return None
    key, message = problems[0]
    label = _BY_KEY[key].label if key in _BY_KEY else key
    return f"{label} {message}"


def with_value(settings: ChannelSettings, key: str, value: int) -> tuple[ChannelSettings, str | None]:
    """Settings with one value replaced, and why they are refused (None when they are fine)."""
    new = dataclasses.replace(settings, **{key: value})
    return new, refusal(new)


def stepped(settings: ChannelSettings, key: str, steps: int, coarse: bool) -> int:
    """The value `steps` steps (negative: down) from the current one; clamped at zero."""
    f = _BY_KEY[key]
    value = int(getattr(settings, key))
    if f.doubling:
        for _ in range(abs(steps)):
            value = value * 2 if steps > 0 else max(1, value // 2)
        return value
    return max(0, value + steps * (f.coarse if coarse else f.fine))


def parse_value(text: str, key: str) -> int:
    """A typed value as a whole number; raises ValueError with a one-line reason."""
    cleaned = text.strip().replace("_", "")
    try:
        return int(cleaned, 0)
    except ValueError:
        raise ValueError(f"{_BY_KEY[key].label} must be a whole number of {_BY_KEY[key].unit}, "
                         f"not {text.strip()!r}") from None


LARGEST = (1 << 31) - 1  # the search for a setting's range stops here (settings are C int32 values)


def allowed_range(settings: ChannelSettings, key: str, rate_hz: float | None = None) -> str:
    """The values `key` may take with the other settings as they are, in words: `16 … 16777216 counts`,
    `1, 2, 4 … 256 frames (powers of two)`. Found by asking `ChannelSettings.problems()` (through
    `with_value`), so it says exactly what a refusal would; empty when the settings are refused already.
    """
    f = _BY_KEY[key]

    def fine(value: int) -> bool:
        return with_value(settings, key, value)[1] is None

    if f.doubling:
        powers = [1 << n for n in range(31) if fine(1 << n)]
        if not powers:
            return ""
        shown = ", ".join(map(str, powers[:3])) + (f" … {powers[-1]}" if len(powers) > 3 else "")
        in_ms = range_in_ms(powers[0], powers[-1], rate_hz)
        return f"{shown} {unit_word(powers[-1], f.unit)} (powers of two)" + (f" {in_ms}" if in_ms else "")
    now = int(getattr(settings, key))
    if not fine(now):
        return ""
    # Every setting's accepted values are one interval around the current value: bisect both ends.
    lo, hi = 0, now
    while lo < hi:
        mid = (lo + hi) // 2
        lo, hi = (lo, mid) if fine(mid) else (mid + 1, hi)
    low = lo
    lo, hi = now, LARGEST
    while lo < hi:
        mid = (lo + hi + 1) // 2
        lo, hi = (mid, hi) if fine(mid) else (lo, mid - 1)
    low_text = "0 (never)" if key == "stuck_timeout_frames" and low == 0 else str(low)
    unit = "" if f.unit == "shift" else f" {unit_word(lo, f.unit)}"  # (the prompt says what a shift is)
    in_ms = range_in_ms(low, lo, rate_hz) if key in TIME_KEYS else ""
    return f"{low_text} … {lo}{unit}" + (f" {in_ms}" if in_ms else "")


# -- time in milliseconds at the board's frame rate ---------------------------------------------------
# Debounce, the baseline period and the stuck timeout count frames (ALGORITHM.md); people think of them
# in milliseconds. A time is typed as `40ms`, `40 ms`, `0.04s` (or `0.04 s`) and becomes whole frames at
# the board's rate: to the nearest frame, halves away from zero (as C's `lround`), and for the baseline
# period (powers of two only) to the nearest power of two by ratio. Plain numbers stay frames.
TIME_KEYS = frozenset(f.key for f in FIELDS if f.unit == "frames")
_TIME_UNITS = {"ms": Fraction(1), "s": Fraction(1000)}  # in ms
NO_RATE = "ms cannot be used yet: the board's frame rate is not known (wait for its frames), type frames"


@dataclass(frozen=True, slots=True)
class TimeValue:
    """A typed time turned into frames: what was typed (ms), the exact frame count and the one used."""

    ms: float
    rate_hz: float
    exact_frames: float
    frames: int

    def note(self) -> str:
        """`40 ms = 2.4 frames at 60 Hz: 2 frames (33 ms)`: the rounding, in one line."""
        return (f"{_num(self.ms)} ms = {_num(self.exact_frames)} {unit_word(self.exact_frames, 'frames')} "
                f"at {_num(self.rate_hz)} Hz: {with_unit(self.frames, 'frames')} "
                f"({format_ms(frames_to_ms(self.frames, self.rate_hz))})")


def _num(value: float) -> str:
    """A figure with at most one decimal and no trailing `.0` (2.4, 60, 0.5)."""
    text = f"{value:.1f}" if abs(value) < 100 else f"{value:.0f}"
    return text[:-2] if text.endswith(".0") else text


def frames_to_ms(frames: int, rate_hz: float) -> float:
    return frames * 1000.0 / rate_hz


def format_ms(ms: float) -> str:
    """A duration for the screen: `33 ms`, `2.5 s`, `4.4 min` (whole ms below 10 s)."""
    if ms < 10_000:
        return f"{ms:.0f} ms"
    if ms < 600_000:
        return f"{_num(ms / 1000)} s"
    if ms < 7_200_000:
        return f"{_num(ms / 60_000)} min"
    return f"{_num(ms / 3_600_000)} h"


def round_half_away(x: Fraction | float) -> int:
    """The nearest whole number, halves away from zero (C99 `lround`; Python's `round` goes to even)."""
    x = Fraction(x)
    return math.floor(abs(x) + Fraction(1, 2)) * (1 if x >= 0 else -1)


def ms_to_frames(ms: Fraction | float, rate_hz: float, key: str) -> TimeValue:
    """`ms` as whole frames of `key` at `rate_hz` (the nearest; a power of two for a doubling field).
    Worked in exact fractions, so a typed half frame (`2.5ms` at 1 kHz) always goes up."""
    exact = Fraction(ms) * Fraction(rate_hz) / 1000
    if _BY_KEY[key].doubling:
        frames = 1 if exact <= 1 else 1 << round_half_away(math.log2(exact))
    else:
        frames = round_half_away(exact)
    return TimeValue(float(ms), rate_hz, float(exact), frames)


def parse_time(text: str) -> Fraction | None:
    """Milliseconds from `40ms`, `40 ms`, `0.04s`, `0.04 s`; None when the text names no time unit."""
    cleaned = text.strip().lower().replace("_", "")
    for unit in ("ms", "s"):  # ms first: `40ms` also ends in s
        if cleaned.endswith(unit):
            number = cleaned[: -len(unit)].strip()
            if len(number) > 24 or "e" in number:  # `1e999999ms` would build a huge number
                return None
            try:
                value = Fraction(number)  # exact decimals: `0.0025s` is 2.5 ms, not 2.5000000000000004
            except (ValueError, ZeroDivisionError):
                return None
            return value * _TIME_UNITS[unit]
    return None


def typed_frames(text: str, key: str, rate_hz: float | None) -> tuple[int, TimeValue | None]:
    """A typed value of `key` in frames: a whole number of its unit, or for the frame counts a time in
    ms or s at the board's rate (with the rounding, to say). ValueError with a one-line reason."""
    f = _BY_KEY[key]
    if key in TIME_KEYS and _looks_like_time(text):
        ms = parse_time(text)
        if ms is None:
            raise ValueError(f"{f.label} must be whole frames or a time such as 40ms or 0.04s, "
                             f"not {text.strip()!r}")
        if ms < 0:
            raise ValueError(f"{f.label} cannot be a negative time ({text.strip()})")
        if not rate_hz or rate_hz <= 0:
            raise ValueError(NO_RATE)
        tv = ms_to_frames(ms, rate_hz, key)
        return tv.frames, tv
    return parse_value(text, key), None


def _looks_like_time(text: str) -> bool:
    cleaned = text.strip().lower()
    return cleaned.endswith("s") and not cleaned.startswith("0x")


def range_in_ms(low: int, high: int, rate_hz: float | None) -> str:
    """`(0 … 4250 ms at 60 Hz)` for a range of frames, or empty without a rate."""
    if not rate_hz or rate_hz <= 0:
        return ""
    return f"({format_ms(frames_to_ms(low, rate_hz))} … {format_ms(frames_to_ms(high, rate_hz))} " \
           f"at {_num(rate_hz)} Hz)"
