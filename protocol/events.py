"""The typed events the protocol layer hands upward, and its running link statistics.

This module is the contract between `protocol/` and everything above it: the decoder and the link
produce these objects, `processing/`, `devices/` tests and `tui/` consume them. They are small frozen
dataclasses so they can cross threads safely. Frames travel in blocks (one numpy array of readings
for many consecutive frames) because per-frame Python objects would cost more than decoding them.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from enum import StrEnum

import numpy as np


class FaultKind(StrEnum):
    """What went wrong on the link. The values are the statistic names used everywhere."""

    LOST = "lost"  # frames missing from a sequenced stream (count = how many)
    RESET = "reset"  # the board's sequence jumped backwards: it restarted
    GARBLED = "garbled"  # a line that is none of the known kinds
    OVERLONG = "overlong"  # a line over the length limit, dropped whole
    BAD_CHECKSUM = "bad_checksum"  # checksum mismatch, or missing after checksums were seen
    WIDTH_MISMATCH = "width_mismatch"  # a frame with a channel count other than the known one
    BOARD_CHANGED = "board_changed"  # three frames in a row of one new width: the board changed
    OVERFLOW = "overflow"  # frames the consumer was too slow to take (bounded queue), count = dropped
    DROPPED = "dropped"  # other events (notes, answers, info lines) dropped for the same reason, counted
    BAUD_SUSPECT = "baud_suspect"  # most bytes of the first 2 s after opening were garbage: wrong baud?
    SILENT = "silent"  # no bytes for 2 s after opening, or a stall of 2 s later (count = seconds so far)
    UNREADABLE = "unreadable"  # a printable stream in no form padtune reads (detail quotes a line)
    REPEATED = "repeated"  # frames repeating the previous sequence number (count = how many since the
    #                        last report; reported at a bounded rate, never once per line)


class LinkState(StrEnum):
    CONNECTING = "connecting"
    CONNECTED = "connected"
    DISCONNECTED = "disconnected"
    RECONNECTING = "reconnecting"
    RECONNECTED = "reconnected"
    CLOSED = "closed"


@dataclass(frozen=True, slots=True, eq=False)
class FrameBlock:
    """Consecutive decoded frames of one width, in arrival order.

    `readings` is int64 of shape (n, channels); `t_s` float64 host arrival times in seconds (the
    clock is the one passed to the decoder); `seq` int64, -1 for a frame sent without a sequence
    number. `first_index` is the decoder's running frame counter of the first row, so every frame of
    a session has a unique index.
    """

    t_s: np.ndarray
    seq: np.ndarray
    readings: np.ndarray
    first_index: int
    # The board's own time per frame from a leading time column (raw integer ticks, unit as printed),
    # or None when the board sent none. Never a channel.
    board_time: np.ndarray | None = None
    # The board's own key state per frame and channel from a frame's optional state field (PROTOCOL.md
    # section 3; int8 of shape (n, channels), processing.detections.KeyState's values), or None when
    # the frames carried none.
    board_states: np.ndarray | None = None

    def __len__(self) -> int:
        return int(self.readings.shape[0])

    @property
    def channels(self) -> int:
        return int(self.readings.shape[1])


@dataclass(frozen=True, slots=True)
class BoardInfo:
    """An info line (`! key=value ...`). Known keys are parsed; every key is kept in `fields`.

    `polarity` holds one sign (+1 touch raises counts, -1 lowers) per channel when the board said so
    per channel, or a single-element tuple when one sign was given for all; empty when not given.
    `new_session` is true when the line carried `proto`, which starts a new session.
    """

    t_s: float
    fields: dict[str, str]
    proto: int | None = None
    board: str | None = None
    channels: int | None = None
    rate_hz: float | None = None
    names: tuple[str, ...] = ()
    method: str | None = None
    polarity: tuple[int, ...] = ()
    fw: str | None = None
    new_session: bool = False

    @property
    def extra(self) -> dict[str, str]:
        """Keys this version of the protocol does not define: kept and shown, never an error."""
        known = {"proto", "board", "channels", "rate", "names", "method", "polarity", "fw"}
        return {k: v for k, v in self.fields.items() if k not in known}


@dataclass(frozen=True, slots=True)
class StreamForm:
    """How a board without the v1 frame forms prints its data, as the decoder recognised it.

    Emitted once when the form is first recognised (and again if it changes), before the frames read
    in it. `form` is `columns` (bare numbers), `pairs` (`name:value` or `name=value`) or `brackets`
    (`name:[ value]`); `names` are the channel names the board printed (empty for bare columns);
    `scale` is the fixed power of ten decimal values are multiplied by (1 for whole numbers);
    `time_column` is true when a leading, strictly increasing column is read as the board's time
    (carried in `FrameBlock.board_time`, never a channel). An info line's names and polarity win.
    """

    t_s: float
    form: str
    names: tuple[str, ...] = ()
    scale: int = 1
    time_column: bool = False
    detail: str = ""


@dataclass(frozen=True, slots=True)
class Note:
    """A comment line from the board (`# text`): kept for the log, never counted as garbage."""

    t_s: float
    text: str


@dataclass(frozen=True, slots=True)
class LinkFault:
    """Something the decoder or link had to drop or noticed; `count` is how many it stands for."""

    t_s: float
    kind: FaultKind
    count: int = 1
    detail: str = ""


@dataclass(frozen=True, slots=True)
class BoardChanged:
    """Three consecutive frames of one new width: the board now has `channels` channels."""

    t_s: float
    old_channels: int | None
    channels: int


@dataclass(frozen=True, slots=True)
class LinkStatus:
    """A change of the connection: connected, disconnected, reconnecting, reconnected, closed."""

    t_s: float
    state: LinkState
    port: str
    detail: str = ""


@dataclass(frozen=True, slots=True)
class Answer:
    """A board's answer to a host command (PROTOCOL.md section 7): `>val ...`, `>ok ...` or `>no ...`.

    `kind` is `val`, `ok` or `no`; `text` is the rest of the line after the kind and one space (its
    checksum removed). `protocol.commands.parse_reply(kind, text)` reads it. Never a frame, never a
    session start, never garbage: the command client (`protocol.command_client`) matches it to its
    command.
    """

    t_s: float
    kind: str
    text: str


Event = FrameBlock | BoardInfo | StreamForm | Note | LinkFault | BoardChanged | LinkStatus | Answer


@dataclass(slots=True)
class LinkStats:
    """Running counts since the decoder (or link) started. Mutable; copy with `snapshot()`."""

    frames: int = 0
    lost: int = 0
    resets: int = 0
    garbled: int = 0
    overlong: int = 0
    bad_checksum: int = 0
    width_mismatch: int = 0
    board_changes: int = 0
    notes: int = 0
    infos: int = 0
    bytes_in: int = 0
    overflow: int = 0
    extra: dict[str, int] = field(default_factory=dict)

    def snapshot(self) -> LinkStats:
        copy = LinkStats(**{k: getattr(self, k) for k in self.__slots__ if k != "extra"})
        copy.extra = dict(self.extra)
        return copy

    def as_dict(self) -> dict[str, int]:
        out = {k: getattr(self, k) for k in self.__slots__ if k != "extra"}
        out.update(self.extra)
        return out
