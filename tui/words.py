"""Small wording rules the screens share: counts that agree in number, units after values, and long
names shortened in the middle (a port path's end says which port it is, its start which kind)."""

from __future__ import annotations

ELLIPSIS = "…"


def plural(count: int, noun: str, many: str | None = None) -> str:
    """`1 frame`, `2 frames`, `0 frames`; `many` for nouns that do not just take an s."""
    return f"{count} {noun if abs(count) == 1 else many or noun + 's'}"


def unit_word(value: int, unit: str) -> str:
    """The unit as it reads after `value`: the fields name units in the plural (`frames`, `counts`),
    so one is `frame`; units that are not plural nouns (`shift`, `ms`) stay as they are."""
    if unit.endswith("s") and unit != "ms" and abs(value) == 1:
        return unit[:-1]
    return unit


def with_unit(value: int, unit: str) -> str:
    """`1 frame`, `3 frames`, `15 counts`; the bare value when there is no unit."""
    return f"{value} {unit_word(value, unit)}" if unit else str(value)


def middle(text: str, cells: int) -> str:
    """`text` in at most `cells` characters, cut in the middle with `…` (the head a little shorter than
    the tail: a by-id path's end names the adapter and its port, a URL's end its last options)."""
    if len(text) <= cells:
        return text
    if cells <= 1:
        return ELLIPSIS[:cells]
    keep = cells - 1
    head = keep // 2
    return text[:head] + ELLIPSIS + text[len(text) - (keep - head):]
