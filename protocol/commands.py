"""Host-to-board commands (PROTOCOL.md section 7): the wire's setting keys, their ranges, the lines.

This module owns what a setting may be (`settings_problems`, shared with `processing.settings`, which
builds its `ChannelSettings.problems()` on it: one set of rules for the wire, the profile and the
engine), how command lines are written (`get_line`, `set_line`, `KEEP_LINE`) and read (`parse_command`,
for boards and simulators), and how answer lines (`>val`, `>ok`, `>no`) are written and read.
Pure: no I/O.
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

# The profile's setting keys, in the order `>val` lines list them (and ChannelSettings declares them).
SETTING_KEYS: tuple[str, ...] = (
    "threshold_counts", "hysteresis_counts", "touch_debounce_frames", "release_debounce_frames",
    "baseline_slow_shift", "baseline_fast_shift", "baseline_period_frames", "stuck_timeout_frames",
)
POLARITY_KEY = "polarity"
WIRE_KEYS: tuple[str, ...] = (*SETTING_KEYS, POLARITY_KEY)
DEFAULTS: dict[str, int] = {
    "threshold_counts": 100, "hysteresis_counts": 15, "touch_debounce_frames": 3,
    "release_debounce_frames": 3, "baseline_slow_shift": 6, "baseline_fast_shift": 2,
    "baseline_period_frames": 16, "stuck_timeout_frames": 0,
}

MAX_COUNTS = 1 << 24  # readings and thresholds are assumed to fit comfortably in 32 bits
MAX_DEBOUNCE_FRAMES = 255
MAX_SHIFT = 16
MAX_PERIOD_FRAMES = 256  # must stay <= 2**FRAC_BITS so the period mean is exact
MAX_STUCK_FRAMES = (1 << 31) - 1
# Each key's own range (the cross-key rules are in `settings_problems`): what a board checks first.
RANGES: dict[str, tuple[int, int]] = {
    "threshold_counts": (1, MAX_COUNTS),
    "hysteresis_counts": (0, MAX_COUNTS - 1),
    "touch_debounce_frames": (1, MAX_DEBOUNCE_FRAMES),
    "release_debounce_frames": (1, MAX_DEBOUNCE_FRAMES),
    "baseline_slow_shift": (0, MAX_SHIFT),
    "baseline_fast_shift": (0, MAX_SHIFT),
    "baseline_period_frames": (1, MAX_PERIOD_FRAMES),
    "stuck_timeout_frames": (0, MAX_STUCK_FRAMES),
}
MAX_WORD_CHARS = 16  # how much of an unknown command word a `>no` answer quotes
MAX_DIGITS = 10  # a decimal value longer than this is refused before it is converted
ALL = "*"

Problems = list[tuple[str, str]]


def settings_problems(values: Mapping[str, object]) -> Problems:
    """What is wrong with one channel's settings (every key of SETTING_KEYS), as (key, message) pairs.

    The one statement of the rules: ranges, hysteresis below the threshold, fast shift at most the slow
    one, the period a power of two. Whole numbers only (a bool is not one). Empty when all is well.
    """
    out: Problems = []
    for key in SETTING_KEYS:
        value = values[key]
        if not isinstance(value, int) or isinstance(value, bool):
            out.append((key, f"must be a whole number, not {value!r}"))
    if out:
        return out
    v: dict[str, int] = {k: values[k] for k in SETTING_KEYS}  # type: ignore[misc]
    if not 1 <= v["threshold_counts"] <= MAX_COUNTS:
        out.append(("threshold_counts", f"must be between 1 and {MAX_COUNTS}, not {v['threshold_counts']}"))
    hyst, thr = v["hysteresis_counts"], v["threshold_counts"]
    if hyst < 0:
        out.append(("hysteresis_counts", f"must not be negative ({hyst})"))
    elif hyst >= thr:
        out.append(("hysteresis_counts", f"{hyst} must be below the threshold ({thr}), or the key could "
                    "never release"))
    for key in ("touch_debounce_frames", "release_debounce_frames"):
        if not 1 <= v[key] <= MAX_DEBOUNCE_FRAMES:
            out.append((key, f"must be between 1 (react on the first frame) and {MAX_DEBOUNCE_FRAMES}, "
                        f"not {v[key]}"))
    for key in ("baseline_slow_shift", "baseline_fast_shift"):
        if not 0 <= v[key] <= MAX_SHIFT:
            out.append((key, f"must be between 0 and {MAX_SHIFT}, not {v[key]}"))
    fast, slow = v["baseline_fast_shift"], v["baseline_slow_shift"]
    if fast > slow:
        out.append(("baseline_fast_shift", f"{fast} is slower than baseline_slow_shift ({slow}); the "
                    "baseline must recover faster than it drifts"))
    p = v["baseline_period_frames"]
    if not 1 <= p <= MAX_PERIOD_FRAMES or p & (p - 1):
        out.append(("baseline_period_frames",
                    f"must be a power of two from 1 to {MAX_PERIOD_FRAMES}, not {p}"))
    if not 0 <= v["stuck_timeout_frames"] <= MAX_STUCK_FRAMES:
        out.append(("stuck_timeout_frames", f"must be 0 (never) or a positive frame count, "
                    f"not {v['stuck_timeout_frames']}"))
    return out


# ------------------------------------------------------------------ values on the wire

def polarity_text(sign: int) -> str:
    return "+" if sign > 0 else "-"


def format_pairs(values: Mapping[str, int], keys: Sequence[str]) -> str:
    """`key=value ...` in the order of `keys` (polarity as `+` or `-`)."""
    return " ".join(f"{k}={polarity_text(values[k]) if k == POLARITY_KEY else values[k]}" for k in keys)


class CommandError(ValueError):
    """A command or answer line that does not follow section 7; str() is `key: reason` or a reason."""


def parse_value(key: str, text: str) -> int:
    """One wire value: a decimal whole number for a setting, `+` or `-` (as +1 / -1) for polarity."""
    if key == POLARITY_KEY:
        if text in ("+", "-"):
            return 1 if text == "+" else -1
        raise CommandError(f"{key}: must be + or -, not {text[:MAX_WORD_CHARS]!r}")
    if key not in SETTING_KEYS:
        raise CommandError(f"{key[:MAX_WORD_CHARS]}: unknown key")
    digits = text[1:] if text[:1] == "-" else text
    if not digits.isascii() or not digits.isdigit():
        raise CommandError(f"{key}: not a decimal whole number: {text[:MAX_WORD_CHARS]!r}")
    if len(digits.lstrip("0")) > MAX_DIGITS:  # a whole number, too long to be worth converting
        low, high = RANGES[key]
        shown = text if len(text) <= 24 else f"{text[:20]}... ({len(digits)} digits)"
        raise CommandError(f"{key}: {shown} is out of range: must be between {low} and {high}")
    return int(text)


def parse_pairs(words: Sequence[str]) -> dict[str, int]:
    """`key=value` words into a dict in the order given (CommandError at the first bad one)."""
    out: dict[str, int] = {}
    for word in words:
        key, eq, text = word.partition("=")
        if not eq or not key:
            raise CommandError(f"{word[:MAX_WORD_CHARS]}: not key=value")
        if key not in WIRE_KEYS:
            raise CommandError(f"{key[:MAX_WORD_CHARS]}: unknown key")
        if key in out:
            raise CommandError(f"{key}: given twice")
        out[key] = parse_value(key, text)
    return out


_BLANKS = re.compile(r"[ \t]+")


def split_words(text: str) -> list[str]:
    """A line's words as a board reads them: only ASCII spaces (and tabs, as the C parser,
    devices/firmware/pt_cmd.c) separate them, never other whitespace (`\\x1c`, a no-break space)."""
    return [w for w in _BLANKS.split(text) if w]


def channel_name(text: str) -> str:
    """How answers name a channel word: a number as plain decimal (`01` is `1`, as the C board says
    it), `*` and anything else as given (at most MAX_WORD_CHARS)."""
    text = text[:MAX_WORD_CHARS]
    return str(int(text)) if text.isascii() and text.isdigit() else text


def check_channel(text: str, channels: int) -> int | None:
    """A channel word: its index, None for `*` (every channel); CommandError for anything else."""
    if text == ALL:
        return None
    if not text.isascii() or not text.isdigit() or len(text) > 6:
        raise CommandError(f"channel: not a channel number or *: {text[:MAX_WORD_CHARS]!r}")
    index = int(text)
    if index >= channels:
        raise CommandError(f"channel: no channel {index} (channels are 0..{channels - 1})")
    return index


# ------------------------------------------------------------------ host to board

KEEP_LINE = b"keep\n"


def get_line(channel: int | None) -> bytes:
    return f"get {ALL if channel is None else channel}\n".encode("ascii")


def set_line(channel: int | None, values: Mapping[str, int]) -> bytes:
    """`set N key=value ...` in the order of `values` (polarity as + or -)."""
    if not values:
        raise ValueError("set needs at least one key=value")
    for key in values:
        if key not in WIRE_KEYS:
            raise ValueError(f"{key}: not a setting key")
    return f"set {ALL if channel is None else channel} {format_pairs(values, list(values))}\n".encode("ascii")


@dataclass(frozen=True, slots=True)
class Command:
    """A host line as a board reads it: `word` (`?`, `get`, `set`, `keep` or another), its other words."""

    word: str
    args: tuple[str, ...]

    @property
    def subject(self) -> str:
        """What answers name: the word, and the channel word for get and set."""
        if self.word in ("get", "set") and self.args:
            return f"{self.word} {channel_name(self.args[0])}"
        return self.word[:MAX_WORD_CHARS]


def parse_command(line: bytes | str) -> Command | None:
    """One host line (its line end removed or not); None for an empty one."""
    text = line.decode("ascii", "replace") if isinstance(line, bytes) else line
    words = split_words(text.rstrip("\r\n"))
    if not words:
        return None
    return Command(words[0], tuple(words[1:]))


# ------------------------------------------------------------------ board to host

ANSWER_KINDS = ("val", "ok", "no")


def val_line(channel: int, values: Mapping[str, int]) -> str:
    """`>val N key=value ... polarity=+` (every key of WIRE_KEYS), no line end."""
    return f">val {channel} {format_pairs(values, WIRE_KEYS)}"


def ok_line(subject: str, rest: str = "") -> str:
    return f">ok {subject}{' ' + rest if rest else ''}"


def no_line(subject: str, reason: str) -> str:
    return f">no {subject}: {reason}"


@dataclass(frozen=True, slots=True)
class Reply:
    """An answer line's meaning: `kind` val/ok/no; `subject` (`get 3`, `keep`, an unknown word) for ok
    and no; `reason` for no; for val and for `>ok set`, `channel` and the `values` carried."""

    kind: str
    subject: str = ""
    reason: str = ""
    channel: int | None = None
    values: dict[str, int] | None = None


def parse_reply(kind: str, text: str) -> Reply:
    """The part after `>val `, `>ok ` or `>no ` (CommandError when it is not section 7's shape)."""
    words = split_words(text)
    if kind == "val":
        if not words or not words[0].isdigit():
            raise CommandError("a value line starts with the channel number")
        values = parse_pairs(words[1:])
        missing = [k for k in WIRE_KEYS if k not in values]
        if missing:
            raise CommandError(f"{missing[0]}: missing from the value line")
        return Reply("val", channel=int(words[0]), values=values)
    if kind == "no":
        subject, colon, reason = text.partition(":")
        if not colon or not subject.strip():
            raise CommandError("a refusal is `>no SUBJECT: reason`")
        said = split_words(subject)
        if said[0] in ("get", "set") and len(said) > 1:
            said[1] = channel_name(said[1])
        return Reply("no", subject=" ".join(said), reason=reason.strip())
    if kind == "ok":
        if not words:
            raise CommandError("an ok answer names its command")
        if words[0] == "set" and len(words) >= 2:
            channel = None if words[1] == ALL else int(words[1]) if words[1].isdigit() else -1
            if channel == -1:
                raise CommandError("`>ok set` names its channel")
            return Reply("ok", subject=f"set {channel_name(words[1])}", channel=channel,
                         values=parse_pairs(words[2:]))
        if words[0] == "get" and len(words) >= 2:
            return Reply("ok", subject=f"get {channel_name(words[1])}")
        return Reply("ok", subject=words[0])
    raise CommandError(f"{kind[:MAX_WORD_CHARS]}: not an answer kind")
