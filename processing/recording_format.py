"""The recording format's shared parts: its version line, header start and mark kinds, and the `Mark` and
`Recording` types.

The format itself is described in `processing.recording` (README, "Recordings"). Its writer
(`processing.recording`) and its reader (`processing.recording_parse`, with the file shell
`processing.recording_read`) both import from here and the reader imports nothing of the writer, so the
two never import each other.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from protocol.events import BoardInfo, Event, FrameBlock

FORMAT_LINE = "# padtune recording v1"
FORMAT_PREFIX = "# padtune recording v"
HEADER_START = "t_s,seq"
MARK_KINDS = ("note", "touch-start", "touch-end", "quiet-start", "quiet-end")


@dataclass(frozen=True, slots=True)
class Mark:
    """A user's mark in a recording.

    `kind` is `note` (a moment worth finding again), `touch-start`/`touch-end` (the named `channel` is
    touched between the two), or `quiet-start`/`quiet-end` (hands off between the two).
    """

    t_s: float
    kind: str = "note"
    channel: str | None = None
    text: str = ""


@dataclass
class Recording:
    """A recording read back: metadata, events in stream order (ready for `Session.handle`), marks."""

    path: str
    version: int | None  # None for a raw capture
    meta: dict[str, str] = field(default_factory=dict)
    events: list[Event] = field(default_factory=list)
    marks: list[Mark] = field(default_factory=list)
    names: tuple[str, ...] = ()
    truncated: bool = False  # the last line was partial and was dropped

    @property
    def info(self) -> BoardInfo | None:
        return next((e for e in self.events if isinstance(e, BoardInfo)), None)

    @property
    def blocks(self) -> list[FrameBlock]:
        return [e for e in self.events if isinstance(e, FrameBlock)]

    @property
    def frames(self) -> int:
        return sum(len(b) for b in self.blocks)

    @property
    def channels(self) -> int | None:
        blocks = self.blocks
        if blocks:
            return blocks[-1].channels
        info = self.info
        return info.channels if info else None

    @property
    def rate_hz(self) -> float | None:
        """The board's nominal rate, else the rate measured from the host times."""
        info = self.info
        if info and info.rate_hz:
            return info.rate_hz
        t_s, _, _ = self.arrays()
        if len(t_s) > 1 and t_s[-1] > t_s[0]:
            return float((len(t_s) - 1) / (t_s[-1] - t_s[0]))
        return None

    def arrays(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """All frames of the last width: (t_s, seq, readings (n, channels))."""
        blocks = self.blocks
        if not blocks:
            return np.zeros(0), np.zeros(0, np.int64), np.zeros((0, 0), np.int64)
        width = blocks[-1].channels
        same = [b for b in blocks if b.channels == width]
        return (
            np.concatenate([b.t_s for b in same]),
            np.concatenate([b.seq for b in same]),
            np.concatenate([b.readings for b in same]),
        )
