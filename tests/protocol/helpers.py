"""Shared helpers for the protocol tests: lines with checksums, and events in a comparable form."""

from __future__ import annotations

import binascii
from collections.abc import Iterable, Sequence

from protocol.events import Event, FrameBlock


def ck(body: bytes) -> bytes:
    """`body` with a correct `*HHHH` suffix, computed with the stdlib (independent of protocol.crc)."""
    return body + b"*%04X" % binascii.crc_hqx(body, 0xFFFF)


def stream(lines: Iterable[bytes]) -> bytes:
    return b"".join(line + b"\n" for line in lines)


def flat(events: Sequence[Event], with_time: bool = True) -> list[tuple]:
    """Events with FrameBlocks expanded into one tuple per frame, so block boundaries do not matter."""
    out: list[tuple] = []
    for ev in events:
        if isinstance(ev, FrameBlock):
            for k in range(len(ev)):
                t = float(ev.t_s[k]) if with_time else None
                states = None if ev.board_states is None else tuple(ev.board_states[k].tolist())
                out.append(("frame", t, int(ev.seq[k]), tuple(ev.readings[k].tolist()), ev.first_index + k,
                            states))
        else:
            fields = {name: getattr(ev, name) for name in type(ev).__slots__}
            if not with_time:
                fields.pop("t_s", None)
            out.append((type(ev).__name__, tuple(sorted((k, repr(v)) for k, v in fields.items()))))
    return out


def frames(events: Sequence[Event]) -> list[tuple[int, tuple[int, ...]]]:
    return [(f[2], f[3]) for f in flat(events) if f[0] == "frame"]


def kinds(events: Sequence[Event]) -> list[str]:
    return [getattr(ev, "kind", type(ev).__name__) for ev in events if not isinstance(ev, FrameBlock)]
