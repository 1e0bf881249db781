"""Faults a simulated board can be told to have: link faults (what the cable and firmware do to the
stream) and unit faults (what a bad board in production looks like).

A fault plan is written as short items, comma-separated or repeated (`--fault`, `fault=` in a URL):

    drop:0.01        drop 1 % of frames (the sequence number skips them)
    garble:0.005     change one byte in 0.5 % of frame lines (the checksum catches it)
    junk:0.002       insert a line of noise after 0.2 % of frames
    reset@5          the board restarts at 5 s (sequence back to 0, banner and info again)
    width:7@3        from 3 s on, frames carry 7 readings
    stall:2@4        at 4 s the board stops sending for 2 s
    open:zone2       the pad is not connected
    short:stop       the pad is shorted to ground
    noisy:dur1[:20]  the pad's noise is 20x (default 10x)
    stuck:zone3[@2]  the key reads as touched from 2 s (default from the start)
    deviate:zone2[@3] from 3 s on, the board's own detector sends zone2's state one step on (a firmware
                     whose state table is off by one); the board sends its key states (states=1)

Times are simulated seconds. `FaultPlan.parse` raises a one-line UserError for anything else.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable
from dataclasses import dataclass, field

from protocol.errors import UserError

_ITEM = re.compile(r"^(?P<kind>[a-z]+)(?::(?P<arg>[^@]+))?(?:@(?P<at>[0-9.]+))?$")
SYNTAX = ("drop:RATE, garble:RATE, junk:RATE, reset@S, width:N@S, stall:SECONDS@S, open:PAD, short:PAD, "
          "noisy:PAD[:FACTOR], stuck:PAD[@S], deviate:PAD[@S]")


@dataclass(frozen=True, slots=True)
class FaultPlan:
    drop_rate: float = 0.0
    garble_rate: float = 0.0
    junk_rate: float = 0.0
    resets_at_s: tuple[float, ...] = ()
    width_changes: tuple[tuple[float, int], ...] = ()  # (at_s, new width)
    stalls: tuple[tuple[float, float], ...] = ()  # (at_s, for_s)
    open_pads: tuple[str, ...] = ()
    shorted_pads: tuple[str, ...] = ()
    noisy_pads: tuple[tuple[str, float], ...] = ()
    stuck_keys: tuple[tuple[str, float], ...] = ()  # (pad, from_s)
    deviating: tuple[tuple[str, float], ...] = ()  # (pad, from_s): the on-board detector's state is off

    @property
    def link_faults(self) -> bool:
        return bool(self.drop_rate or self.garble_rate or self.junk_rate)

    def pads(self) -> set[str]:
        return ({*self.open_pads, *self.shorted_pads} | {p for p, _ in self.noisy_pads}
                | {p for p, _ in self.stuck_keys} | {p for p, _ in self.deviating})

    @classmethod
    def parse(cls, items: Iterable[str]) -> FaultPlan:
        acc: dict[str, list] = {k: [] for k in ("resets_at_s", "width_changes", "stalls", "open_pads",
                                                "shorted_pads", "noisy_pads", "stuck_keys", "deviating")}
        rates: dict[str, float] = {}
        for raw in (part.strip() for item in items for part in item.split(",")):
            if raw:
                _parse_one(raw, acc, rates)
        return cls(**rates, **{k: tuple(v) for k, v in acc.items()})


def _number(text: str | None, item: str, what: str, low: float, high: float) -> float:
    try:
        value = float(text) if text is not None else math.nan
    except ValueError:
        value = math.nan
    if not (low <= value <= high):
        raise UserError(f"fault {item!r}: {what} must be a number from {low:g} to {high:g}; "
                        f"fault items are {SYNTAX}")
    return value


def _parse_one(item: str, acc: dict[str, list], rates: dict[str, float]) -> None:
    m = _ITEM.match(item)
    if not m:
        raise UserError(f"fault {item!r} is not understood; fault items are {SYNTAX}")
    kind, arg, at = m["kind"], m["arg"], m["at"]
    at_s = _number(at, item, "the time after @", 0.0, 1e7) if at is not None else None
    if kind in ("drop", "garble", "junk", "reset", "width", "stall"):
        _stream_fault(item, kind, arg, at_s, acc, rates)
    elif kind in ("open", "short", "noisy", "stuck", "deviate"):
        _pad_fault(item, kind, arg, at_s, acc)
    else:
        raise UserError(f"fault {item!r}: unknown fault {kind!r}; fault items are {SYNTAX}")


def _stream_fault(item: str, kind: str, arg: str | None, at_s: float | None, acc: dict[str, list],
                  rates: dict[str, float]) -> None:
    """What the cable and the firmware do to the stream: rates, or events at a time."""
    if kind in ("drop", "garble", "junk"):
        if at_s is not None:
            raise UserError(f"fault {item!r}: {kind} takes a rate, not a time (e.g. {kind}:0.01)")
        rates[f"{kind}_rate"] = _number(arg, item, "the rate", 0.0, 1.0)
    elif kind == "reset":
        if at_s is None or arg is not None:
            raise UserError(f"fault {item!r}: write reset@SECONDS, e.g. reset@5")
        acc["resets_at_s"].append(at_s)
    elif kind == "width":
        if at_s is None:
            raise UserError(f"fault {item!r}: write width:N@SECONDS, e.g. width:7@3")
        width = _number(arg, item, "the width", 1, 256)
        if width != int(width):
            raise UserError(f"fault {item!r}: the width is a whole number of channels, e.g. width:7@3")
        acc["width_changes"].append((at_s, int(width)))
    else:
        if at_s is None:
            raise UserError(f"fault {item!r}: write stall:SECONDS@SECONDS, e.g. stall:2@4")
        acc["stalls"].append((at_s, _number(arg, item, "the stall length", 0.001, 3600)))


def _pad_fault(item: str, kind: str, arg: str | None, at_s: float | None, acc: dict[str, list]) -> None:
    """What a bad unit looks like: a pad open, shorted, noisy or stuck."""
    if not arg:
        raise UserError(f"fault {item!r}: name the pad, e.g. {kind}:zone1")
    if kind not in ("stuck", "deviate") and at_s is not None:
        raise UserError(f"fault {item!r}: {kind} is there from the start; it takes no @time")
    pad, _, extra = arg.partition(":")
    if kind == "noisy":
        factor = _number(extra, item, "the noise factor", 1.0, 1000.0) if extra else 10.0
        acc["noisy_pads"].append((pad, factor))
    elif extra:
        raise UserError(f"fault {item!r}: {kind} takes only a pad name")
    elif kind == "stuck":
        acc["stuck_keys"].append((pad, at_s or 0.0))
    elif kind == "deviate":
        acc["deviating"].append((pad, at_s or 0.0))
    else:
        acc["open_pads" if kind == "open" else "shorted_pads"].append(pad)


@dataclass(slots=True)
class Injected:
    """What the simulator actually did to the stream, to compare with the link statistics."""

    frames_made: int = 0  # frames the board measured (sent or dropped)
    frames_sent: int = 0
    dropped: int = 0
    garbled: int = 0
    junk: int = 0
    resets: int = 0
    width_changes: int = 0
    stalls: int = 0
    stalled_s: float = 0.0
    bytes_out: int = 0
    notes: int = 0
    infos: int = 0
    extra: dict[str, int] = field(default_factory=dict)

    def as_dict(self) -> dict[str, float]:
        return {k: getattr(self, k) for k in self.__slots__ if k != "extra"}
