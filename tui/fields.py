"""The editable settings of a channel: their labels, units and step sizes; pure.

Stepping and typed values go through `ChannelSettings.problems()`, so the screen refuses exactly what
the engine and the profile loader would refuse, with the same reason. The channel's polarity is one
more field of the edit bar (`EDIT_FIELDS`), though not a `ChannelSettings` value: its edits carry a
`PolarityChoice` through the same undo history.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

from processing.settings import ChannelSettings
from tui.words import unit_word


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


def allowed_range(settings: ChannelSettings, key: str) -> str:
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
        return f"{shown} {unit_word(powers[-1], f.unit)} (powers of two)"
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
    return f"{low_text} … {lo}{unit}"
