"""Channel names: the one rule (1-32 of `A-Z a-z 0-9 _ - .`, unique on a board) and names taken per channel.

A board names its channels in its info line (`names=`) or in its plain form (`zone1:1234 zone2:1250`).
Each name is checked on its own: an invalid or repeated one is reported with its reason and only that
channel falls back (to `chN`, N the 0-based index, or to the name a profile gives it), so one bad name
never costs the others theirs.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass

from protocol.info import MAX_NAME_CHARS, name_problem

NAME_MAX_CHARS = MAX_NAME_CHARS
NAME_RE = re.compile(r"\A[A-Za-z0-9_.-]{1,32}\Z")  # \Z, not $: "$" would let a trailing newline in
NAME_HINT = "1-32 letters, digits, '_', '-', '.'"
__all__ = ["NAME_HINT", "NAME_MAX_CHARS", "NAME_RE", "NameProblem", "channel_names", "default_name",
           "name_problem"]


def default_name(channel: int) -> str:
    return f"ch{channel}"


@dataclass(frozen=True, slots=True)
class NameProblem:
    channel: int
    given: str
    reason: str
    used: str

    def describe(self) -> str:
        """One line for the user: `names: 'zone 2' (channel 1) is not a valid name (...): using ch1`."""
        return f"names: {self.given!r} (channel {self.channel}) {self.reason}: using {self.used}"


def channel_names(given: Sequence[str], channels: int,
                  fallback: Sequence[str] = ()) -> tuple[tuple[str, ...], list[NameProblem]]:
    """Names for `channels` channels from the board's `given` names, checked one by one.

    A valid name is kept unless an earlier channel already has it; any other channel gets its
    `fallback` name (a profile's) or `chN`, and a problem saying why. Names the board did not give
    (a short list) also fall back, without a problem. The result is always unique.
    """
    fall = [fallback[c] if c < len(fallback) and NAME_RE.match(fallback[c]) else default_name(c)
            for c in range(channels)]
    chosen: list[str | None] = [None] * channels
    problems: list[tuple[int, str, str]] = []
    taken: dict[str, int] = {}
    for c in range(min(channels, len(given))):
        name = given[c]
        why = name_problem(name)
        if why is not None:
            problems.append((c, name, f"is not a valid name ({why})"))
        elif name in taken:
            problems.append((c, name, f"repeats the name of channel {taken[name]}"))
        else:
            chosen[c] = name
            taken[name] = c
    out: list[str] = []
    for c in range(channels):
        name = chosen[c]
        if name is None:
            name = _free(fall[c], c, taken)
            taken[name] = c
        out.append(name)
    used = dict(enumerate(out))
    return tuple(out), [NameProblem(c, name, why, used[c]) for c, name, why in problems]


def _free(wanted: str, channel: int, taken: dict[str, int]) -> str:
    """`wanted` if no other channel has it, else `chN`, else `chN-2`, `chN-3`, ... (always unique)."""
    for candidate in (wanted, default_name(channel)):
        if candidate not in taken:
            return candidate
    k = 2
    while f"{default_name(channel)}-{k}" in taken:
        k += 1
    return f"{default_name(channel)}-{k}"
