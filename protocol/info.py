"""Parsing info lines (`! key=value ...`) of protocol v1 into `BoardInfo`, and merging them.

Every key is kept as text in `BoardInfo.fields`; the keys v1 defines are also parsed and checked.
A bad value of a defined key makes the whole line unusable (a half-understood line could set a
wrong channel count), so `parse_info` reports why instead of guessing. One bad channel name does not:
the names are passed up as given, and whoever takes them as channel names checks each with
`name_problem` and replaces only the bad one.
"""

from __future__ import annotations

import math
import re

from protocol.events import BoardInfo

# 512 values of 32-bit readings fit one line (protocol.framing.MAX_LINE_BYTES; PROTOCOL.md section 1).
MAX_CHANNELS = 512
MAX_NAME_CHARS = 32
_NAME_CHARS = re.compile(r"[A-Za-z0-9_.\-]+")
KNOWN_KEYS = ("proto", "board", "channels", "rate", "names", "method", "polarity", "fw")


class InfoError(ValueError):
    """Why an info line cannot be used; the message is shown in the link log."""


def name_problem(name: str) -> str | None:
    """Why `name` cannot be a channel name, or None when it can (PROTOCOL.md, section 4).

    A name is 1 to 32 characters of A-Z a-z 0-9 `_` `-` `.`. Uniqueness is checked where names are
    taken as a set (a board's list, a profile), not here.
    """
    if not name:
        return "it is empty"
    if len(name) > MAX_NAME_CHARS:
        return f"it is {len(name)} characters long, at most {MAX_NAME_CHARS} are allowed"
    if not _NAME_CHARS.fullmatch(name):
        bad = next(c for c in name if not _NAME_CHARS.fullmatch(c))
        return f"{bad!r} is not allowed: use letters, digits, '_', '-' and '.'"
    return None


def split_fields(text: str) -> dict[str, str]:
    """`key=value` pairs separated by spaces or tabs; commas belong to values. Last duplicate wins."""
    fields: dict[str, str] = {}
    for token in text.replace("\t", " ").split(" "):
        if not token:
            continue
        key, eq, value = token.partition("=")
        if not eq or not key:
            raise InfoError(f"info token {token[:24]!r} is not key=value")
        fields[key] = value
    if not fields:
        raise InfoError("info line without any key=value pair")
    return fields


def _positive_int(key: str, value: str, most: int | None = None) -> int:
    if not value.isascii() or not value.isdigit() or int(value) < 1:
        raise InfoError(f"info {key}={value[:16]!r} is not a whole number of at least 1")
    number = int(value)
    if most is not None and number > most:
        raise InfoError(f"info {key}={number} is more than {most}")
    return number


def _rate(value: str) -> float:
    try:
        rate_hz = float(value)
    except ValueError:
        raise InfoError(f"info rate={value[:16]!r} is not a number of frames per second") from None
    if not math.isfinite(rate_hz) or rate_hz <= 0:
        raise InfoError(f"info rate={value[:16]!r} must be a positive number of frames per second")
    return rate_hz


def _polarity(value: str) -> tuple[int, ...]:
    signs = value.split(",")
    if not all(s in ("+", "-") for s in signs):
        raise InfoError(f"info polarity={value[:24]!r} must be + or - (one for all, or a comma list)")
    return tuple(1 if s == "+" else -1 for s in signs)


def _text(key: str, value: str) -> str:
    if not value:
        raise InfoError(f"info {key}= is empty")
    return value


def parse_info(fields: dict[str, str], t_s: float, *, cross_check: bool = True) -> BoardInfo:
    """Build a BoardInfo from the fields of one line; raise InfoError naming the bad key.

    `cross_check` also compares `names` and per-channel `polarity` with `channels` of the same line.
    """
    get = fields.get
    proto = _positive_int("proto", get("proto", "")) if "proto" in fields else None
    channels = _positive_int("channels", get("channels", ""), MAX_CHANNELS) if "channels" in fields else None
    rate_hz = _rate(get("rate", "")) if "rate" in fields else None
    names: tuple[str, ...] = ()
    if "names" in fields:
        # Kept as given, an empty or otherwise bad name included: only that channel's name is replaced
        # where the names are used (name_problem); the rest of the line stays good.
        names = tuple(_text("names", get("names", "")).split(","))
    polarity = _polarity(get("polarity", "")) if "polarity" in fields else ()
    if cross_check and channels is not None:
        if names and len(names) != channels:
            raise InfoError(f"info names has {len(names)} names for channels={channels}")
        if len(polarity) > 1 and len(polarity) != channels:
            raise InfoError(f"info polarity has {len(polarity)} signs for channels={channels}")
    return BoardInfo(
        t_s=t_s,
        fields=dict(fields),
        proto=proto,
        board=_text("board", get("board", "")) if "board" in fields else None,
        channels=channels,
        rate_hz=rate_hz,
        names=names,
        method=_text("method", get("method", "")) if "method" in fields else None,
        polarity=polarity,
        fw=_text("fw", get("fw", "")) if "fw" in fields else None,
        new_session=proto is not None,
    )


def merge_info(session: BoardInfo | None, line: BoardInfo) -> BoardInfo:
    """The session's view after `line`: a line with `proto` starts afresh, others update keys."""
    if session is None or line.new_session:
        return line
    merged = parse_info({**session.fields, **line.fields}, line.t_s, cross_check=False)
    return BoardInfo(**{**_as_kwargs(merged), "new_session": session.new_session})


def _as_kwargs(info: BoardInfo) -> dict[str, object]:
    return {name: getattr(info, name) for name in BoardInfo.__slots__}
