"""The plain forms of data lines (PROTOCOL.md, "Plain forms"): reading one line, deciding a board's
form from its first data lines, and reading later lines in that form.

What quick sketches and library examples print, read with no configuration: bare columns of numbers
(`  1234  1250`, `12.5,13.0`), `name:value` / `name=value` pairs (`zone1:1234, zone2:1250`), a name
with its value in square brackets (`T0:[ 1234] T1:[ 1250] `), any of them with a leading time column.
Pure functions and frozen values: `protocol.rules.LineRules` owns the state (the hold of the first
lines, the current form) and applies these in stream order.
"""

from __future__ import annotations

import itertools
import re
from collections import Counter
from dataclasses import dataclass

INT32_MIN, INT32_MAX = -(2**31), 2**31 - 1
INT64_MIN, INT64_MAX = -(2**63), 2**63 - 1
FORM_LINES = 8  # data lines a form is decided on (PROTOCOL.md)
MIN_TIME_LINES = 4  # fewest lines (three steps) a time column may be recognised on
TIME_STEP_RATIO = 4  # a time column's largest step is at most this many times its smallest
MAX_DECIMALS = 9  # 10**9 is the largest scale; more decimals than that never fit a 32-bit reading

_NUM = rb"-?[0-9]++(?:\.[0-9]++)?"
# Values are separated by a run of blanks holding at most one comma (as in v1); possessive, so a long
# run cannot backtrack.
_SEP = rb"(?>[ \t]*+,[ \t]*+|[ \t]++)"
# A name: printable ASCII without blanks, commas, colons, equals signs or brackets, not starting with
# punctuation. Whether it is a good channel name is `protocol.info.name_problem`'s to say (the session
# replaces a bad one), so an odd name never costs the line.
_NAME = rb"[A-Za-z0-9_][^\x00-\x20,:=\[\]\x7f-\xff]*+"
_PAIR = rb"(" + _NAME + rb")[:=][ \t]*+(" + _NUM + rb")"
_ITEM = rb"(" + _NAME + rb")[:=][ \t]*+\[[ \t]*+(" + _NUM + rb")[ \t]*+\]"
_ITEM_SEP = rb"(?>[ \t]*+,?[ \t]*+)"

_COLUMNS_LINE = re.compile(rb"[ \t]*+" + _NUM + rb"(?:" + _SEP + _NUM + rb")*+" + _SEP + rb"?")
_PAIRS_LINE = re.compile(rb"[ \t]*+" + _PAIR + rb"(?:" + _SEP + _PAIR + rb")*+" + _SEP + rb"?")
_ITEMS_LINE = re.compile(rb"[ \t]*+" + _ITEM + rb"(?:" + _ITEM_SEP + _ITEM + rb")*+" + _ITEM_SEP)
_PAIR_FIND = re.compile(_PAIR)
_ITEM_FIND = re.compile(_ITEM)
_TEXT = re.compile(rb"[ \t]*+[A-Za-z][ -~\t]*+")
_TO_SPACE = bytes.maketrans(b",", b" ")


@dataclass(frozen=True, slots=True)
class PlainLine:
    """One data line of a plain form, its numbers still as text (`tokens`, time column included)."""

    kind: str  # "columns", "pairs" or "brackets"
    names: tuple[bytes, ...]  # as printed, one per token; () for columns
    tokens: tuple[bytes, ...]

    @property
    def shape(self) -> tuple[str, tuple[bytes, ...], int]:
        return self.kind, self.names, len(self.tokens)


def parse_plain(body: bytes) -> PlainLine | None:
    """The plain data line in `body` (checksum removed), or None when it is not one."""
    lead = body.lstrip(b" \t")[:1]
    if not lead:
        return None
    if (lead == b"-" or lead.isdigit()) and _COLUMNS_LINE.fullmatch(body):
        return PlainLine("columns", (), tuple(body.translate(_TO_SPACE).split()))
    if _PAIRS_LINE.fullmatch(body):
        found = _PAIR_FIND.findall(body)
        kind = "pairs"
    elif _ITEMS_LINE.fullmatch(body):
        found = _ITEM_FIND.findall(body)
        kind = "brackets"
    else:
        return None
    names, values = zip(*found, strict=True)
    return PlainLine(kind, names, values)


def is_text(body: bytes) -> bool:
    """A human text line: its first non-blank character is a letter, and it is printable ASCII."""
    return _TEXT.fullmatch(body) is not None


def decimals_of(token: bytes) -> int:
    point = token.find(b".")
    return 0 if point < 0 else len(token) - point - 1


def fixed(token: bytes, decimals: int, low: int, high: int) -> int | None:
    """`token` times 10**decimals as an exact integer within [low, high], or None.

    None when the token has more decimals than `decimals` (it would need rounding) or the result is
    out of range. Digits are counted before converting, so an 8000-digit token costs nothing.
    """
    point = token.find(b".")
    digits = token if point < 0 else token[:point] + token[point + 1 :]
    have = 0 if point < 0 else len(token) - point - 1
    if have > decimals:
        return None
    magnitude = digits.lstrip(b"-").lstrip(b"0")
    if len(magnitude) + decimals - have > 19:
        return None
    value = int(magnitude or b"0") * 10 ** (decimals - have)
    if digits[:1] == b"-":
        value = -value
    return value if low <= value <= high else None


@dataclass(frozen=True, slots=True)
class Form:
    """A board's decided plain form: the shape of its lines, the time column and the fixed scales."""

    kind: str
    names: tuple[bytes, ...]  # as printed, the time column's name included
    width: int  # numbers per line, the time column included
    time_column: bool = False
    decimals: int = 0  # readings are value x 10**decimals
    time_decimals: int = 0  # board time is value x 10**time_decimals

    @property
    def shape(self) -> tuple[str, tuple[bytes, ...], int]:
        return self.kind, self.names, self.width

    @property
    def channels(self) -> int:
        return self.width - self.time_column

    @property
    def key_names(self) -> tuple[str, ...]:
        """The channels' names as printed (the time column's left out)."""
        names = self.names[1:] if self.time_column and self.names else self.names
        return tuple(n.decode("ascii") for n in names)

    @property
    def scale(self) -> int:
        return 10**self.decimals

    @property
    def plain_v1(self) -> bool:
        """Lines of this form are v1 plain frames: the decoder's bulk ways may take them."""
        return self.kind == "columns" and not self.time_column and self.decimals == 0

    @property
    def key(self) -> tuple:
        """What a StreamForm says: a change of any of it is announced again."""
        return self.kind, self.key_names, self.decimals, self.time_column

    def describe(self, lines: int) -> str:
        parts = [f"{self.kind} read from {lines} data line{'s' if lines != 1 else ''}"]
        if self.time_column:
            unit = f" x{10 ** self.time_decimals}" if self.time_decimals else ""
            name = f" ({self.names[0].decode('ascii')})" if self.names else ""
            parts.append(f"first column{name} is the board's time{unit}, not a key")
        if self.decimals:
            parts.append(f"values have {self.decimals} decimals: readings are value x{self.scale}")
        return "; ".join(parts)

    def read(self, line: PlainLine) -> tuple[int | None, list[int]] | str:
        """(board time or None, readings) of a line of this form's shape, or why it cannot be read."""
        tokens = line.tokens
        board_time = None
        if self.time_column:
            board_time = fixed(tokens[0], self.time_decimals, INT64_MIN, INT64_MAX)
            if board_time is None:
                return _why(tokens[0], self.time_decimals, "time", "64-bit")
            tokens = tokens[1:]
        values = _quick(tokens, self.decimals)
        if values is None:  # something to explain: find the first value that cannot be read
            values = []
            for token in tokens:
                value = fixed(token, self.decimals, INT32_MIN, INT32_MAX)
                if value is None:
                    return _why(token, self.decimals, "value", "32-bit")
                values.append(value)
        return board_time, values


def _quick(tokens: tuple[bytes, ...], decimals: int) -> list[int] | None:
    """The readings when every token reads plainly within 32 bits, else None (`fixed` then says why).

    int() refuses a decimal point and a token of thousands of digits, so neither slips through.
    """
    try:
        if not decimals:
            values = [int(t) for t in tokens]
        else:
            values = []
            for t in tokens:
                point = t.find(b".")
                if point < 0:
                    values.append(int(t) * 10**decimals)
                    continue
                have = len(t) - point - 1
                if have > decimals:
                    return None
                values.append(int(t[:point] + t[point + 1 :]) * 10 ** (decimals - have))
    except ValueError:
        return None
    if min(values) < INT32_MIN or max(values) > INT32_MAX:
        return None
    return values


def _why(token: bytes, decimals: int, what: str, bits: str) -> str:
    shown = token[:24].decode("ascii") + ("..." if len(token) > 24 else "")
    have = decimals_of(token)
    if have > decimals:
        return (f"{what} {shown} has {have} decimals, more than the {decimals} the stream's first lines "
                f"fixed (never rounded)")
    scale = f" at x{10**decimals}" if decimals else ""
    return f"{what} {shown} is outside the {bits} range{scale}"


def _choose_shape(lines: list[PlainLine]) -> tuple[str, tuple[bytes, ...], int]:
    """The shape most lines have; on a tie the one seen last (what the board prints now)."""
    counts = Counter(line.shape for line in lines)
    last = {line.shape: k for k, line in enumerate(lines)}
    return max(counts, key=lambda s: (counts[s], last[s]))


def _rises_steadily(tokens: list[bytes]) -> bool:
    """Strictly rising, and the largest step at most TIME_STEP_RATIO times the smallest."""
    if len(tokens) < MIN_TIME_LINES:
        return False
    decimals = min(max(decimals_of(t) for t in tokens), MAX_DECIMALS)
    values = [fixed(t, decimals, INT64_MIN, INT64_MAX) for t in tokens]
    if any(v is None for v in values):
        return False
    steps = [b - a for a, b in itertools.pairwise(values)]  # type: ignore[operator]
    return min(steps) > 0 and max(steps) <= TIME_STEP_RATIO * min(steps)


def decide_form(lines: list[PlainLine], expected_channels: int | None) -> Form:
    """The form of a board from its first data lines (at most FORM_LINES, at least one).

    The shape most lines share is the form. Its first column is the board's time when the form has
    two numbers or more and that column rises strictly and steadily over at least MIN_TIME_LINES of
    those lines; an info line's channel count, when known, settles it: width = channels means no time
    column, width = channels + 1 means one if the column rises. The scales are fixed by the most
    decimals seen (at most MAX_DECIMALS).
    """
    kind, names, width = _choose_shape(lines)
    same = [line.tokens for line in lines if line.shape == (kind, names, width)]
    time_column = width >= 2 and expected_channels != width and _rises_steadily([t[0] for t in same])
    first = 1 if time_column else 0
    decimals = max((decimals_of(tok) for t in same for tok in t[first:]), default=0)
    time_decimals = max(decimals_of(t[0]) for t in same) if time_column else 0
    return Form(kind, names, width, time_column, min(decimals, MAX_DECIMALS),
                min(time_decimals, MAX_DECIMALS))
