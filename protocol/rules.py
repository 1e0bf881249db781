"""The per-line rules of protocol v1 and the decoder's state: the one place the rules live.

`LineRules` takes one complete line at a time (`line()`) or, from the fast decoder, a run of frames
already checked in bulk (`accept_run()`), keeps the session state (checksum strictness, known channel
count, the new-width streak, the last sequence number) and the running `LinkStats`, and collects
events in stream order. Both decoders (`protocol.decoder` and `protocol.decoder_plain`) share it, so
they can only differ in how they find and convert frames, never in what the rules say.
"""

from __future__ import annotations

import numpy as np

from protocol.crc import crc16_ccitt_false, split_checksum
from protocol.events import (
    BoardChanged,
    BoardInfo,
    Event,
    FaultKind,
    FrameBlock,
    LinkFault,
    LinkStats,
    Note,
)
from protocol.info import InfoError, merge_info, parse_info, split_fields

SEQ_MODULUS = 65536
# A backward step of at most this many numbers across 65535 -> 0 is read as the wrap with frames
# lost on the way; a longer backward jump is a board reset. (Our choice; see PROTOCOL.md.)
WRAP_WINDOW = 256
BOARD_CHANGE_FRAMES = 3
INT32_MIN, INT32_MAX = -(2**31), 2**31 - 1
_BLANK = b" \t"
_SEPARATORS = b" \t,"


def preview(line: bytes, limit: int = 40) -> str:
    """A short printable rendering of a dropped line for fault details."""
    text = line[:limit].decode("ascii", "backslashreplace")
    return repr(text + ("..." if len(line) > limit else ""))


def parse_frame(body: bytes) -> tuple[int, list[int]] | None:
    """(seq or -1, values) of a frame body (`@seq v0 v1 ...` or `v0 v1 ...`), None if malformed.

    Values are signed decimal 32-bit integers separated by a run of spaces or tabs holding at most
    one comma; a separator may also end the line.
    """
    seq = -1
    if body[:1] == b"@":
        end = 1
        while end < len(body) and 0x30 <= body[end] <= 0x39:
            end += 1
        if end == 1 or end == len(body) or body[end] not in _SEPARATORS:
            return None
        seq = int(body[1:end])
        if seq >= SEQ_MODULUS:
            return None
        body = body[end:].lstrip(b" \t")
        if body[:1] == b",":
            body = body[1:].lstrip(b" \t")
    parts = body.replace(b"\t", b" ").split(b",")
    if len(parts) > 1 and not parts[-1].strip(b" "):
        parts.pop()  # a trailing comma (sketches often print one after every value)
    values: list[int] = []
    for part in parts:
        tokens = [t for t in part.split(b" ") if t]  # only spaces and tabs separate, not \r or \f
        if not tokens:
            return None
        for token in tokens:
            digits = token[1:] if token[:1] == b"-" else token
            if not digits.isdigit():
                return None
            value = int(token)
            if not INT32_MIN <= value <= INT32_MAX:
                return None
            values.append(value)
    return seq, values


class LineRules:
    """Session state, statistics and the ordered event list of one decoder."""

    def __init__(self, max_line_bytes: int = 1024) -> None:
        self.max_line_bytes = max_line_bytes
        self.stats = LinkStats()
        self.info: BoardInfo | None = None
        self.channels: int | None = None
        self.strict = False  # a valid checksummed line was seen since the last info line
        self.last_seq: int | None = None
        self._streak_width: int | None = None
        self._streak = 0
        self._events: list[Event] = []
        self._seqs: list[np.ndarray] = []
        self._rows: list[np.ndarray] = []
        self._pending_first = 0
        self._t_s = 0.0
        # The first line since `clear_unreadable()` that was not read as data (garbled, or text that is
        # not a comment): the link quotes it when a readable stream yields no frame.
        self.first_unreadable: bytes | None = None

    # -- event collection -------------------------------------------------------------------------
    def begin(self, t_s: float) -> None:
        self._t_s = t_s

    def take_events(self) -> list[Event]:
        self._flush()
        events, self._events = self._events, []
        return events

    def _flush(self) -> None:
        if not self._rows:
            return
        readings = self._rows[0] if len(self._rows) == 1 else np.concatenate(self._rows)
        seq = self._seqs[0] if len(self._seqs) == 1 else np.concatenate(self._seqs)
        n = readings.shape[0]
        t_s = np.full(n, self._t_s, dtype=np.float64)
        self._events.append(FrameBlock(t_s=t_s, seq=seq, readings=readings, first_index=self._pending_first))
        self._rows, self._seqs = [], []

    def _emit(self, event: Event) -> None:
        self._flush()
        self._events.append(event)

    def _fault(self, kind: FaultKind, count: int = 1, detail: str = "") -> None:
        self._emit(LinkFault(t_s=self._t_s, kind=kind, count=count, detail=detail))

    def _add_frames(self, seq: np.ndarray, readings: np.ndarray) -> None:
        if self._rows and self._rows[-1].shape[1] != readings.shape[1]:
            self._flush()
        if not self._rows:
            self._pending_first = self.stats.frames
        self._rows.append(readings)
        self._seqs.append(seq)
        self.stats.frames += readings.shape[0]

    # -- lines ------------------------------------------------------------------------------------
    def overlong(self) -> None:
        self.stats.overlong += 1
        self._fault(FaultKind.OVERLONG, detail=f"line over {self.max_line_bytes} bytes dropped")

    def garbled(self, line: bytes, why: str) -> None:
        self.stats.garbled += 1
        if self.first_unreadable is None:
            self.first_unreadable = line[: self.max_line_bytes]
        self._fault(FaultKind.GARBLED, detail=f"{why}: {preview(line)}")

    def bad_checksum(self, line: bytes, why: str) -> None:
        self.stats.bad_checksum += 1
        self._fault(FaultKind.BAD_CHECKSUM, detail=f"{why}: {preview(line)}")

    def line(self, line: bytes) -> None:
        """Apply every rule to one line (LF removed, CR not yet)."""
        if len(line) > self.max_line_bytes:
            self.overlong()
            return
        if line[-1:] == b"\r":
            line = line[:-1]
        if not line.strip(_BLANK):
            return
        body, given = split_checksum(line)
        if given is not None:
            if crc16_ccitt_false(body) != given:
                self.bad_checksum(line, "checksum mismatch")
                return
            self.strict = True
        first = body[:1]
        if first == b"!":
            self._info_line(line, body[1:], checked=given is not None)
        elif first == b"#":
            self.stats.notes += 1
            self._emit(Note(t_s=self._t_s, text=body[1:].strip(_BLANK).decode("ascii", "replace")))
        elif first == b"@" or first == b"-" or first.isdigit():
            if given is None and self.strict:
                self.bad_checksum(line, "no checksum after checksummed lines")
                return
            parsed = parse_frame(body)
            if parsed is None:
                self.garbled(line, "malformed frame")
                return
            self.frame(parsed[0], parsed[1])
        else:
            self.garbled(line, "not a frame, info or comment line")

    def _info_line(self, line: bytes, text: bytes, checked: bool) -> None:
        try:
            if not text.isascii():
                raise InfoError("info line is not ASCII")
            info = parse_info(split_fields(text.decode("ascii")), self._t_s)
        except InfoError as exc:
            self.garbled(line, str(exc))
            return
        self.strict = checked  # an info line ends the strict stretch; a checksummed one starts another
        self.stats.infos += 1
        self.info = merge_info(self.info, info)
        old = self.channels
        if info.new_session:
            self.last_seq = None
            self.channels = None
        if info.channels is not None:
            self.channels = info.channels
        self._streak_width, self._streak = None, 0
        self._emit(info)
        if old is not None and self.channels is not None and self.channels != old:
            self.stats.board_changes += 1
            self._emit(BoardChanged(t_s=self._t_s, old_channels=old, channels=self.channels))

    # -- frames -----------------------------------------------------------------------------------
    def _step_seq(self, seq: int) -> None:
        prev, self.last_seq = self.last_seq, seq
        if prev is None:
            return
        step = (seq - prev) % SEQ_MODULUS
        if step == 1:
            return
        if seq > prev or (seq < prev and step <= WRAP_WINDOW):
            self.stats.lost += step - 1
            self._fault(FaultKind.LOST, count=step - 1, detail=f"seq {prev} -> {seq}")
        else:
            self.stats.resets += 1
            self._fault(FaultKind.RESET, detail=f"seq {prev} -> {seq}")

    def frame(self, seq: int, values: list[int]) -> None:
        """One well-formed frame (seq -1 when it had none)."""
        if seq >= 0:
            self._step_seq(seq)
        width = len(values)
        if self.channels is None:
            self.channels = width
        elif width != self.channels:
            if width == self._streak_width:
                self._streak += 1
            else:
                self._streak_width, self._streak = width, 1
            if self._streak < BOARD_CHANGE_FRAMES:
                self.stats.width_mismatch += 1
                self._fault(
                    FaultKind.WIDTH_MISMATCH, detail=f"{width} values, {self.channels} channels expected"
                )
                return
            old, self.channels = self.channels, width
            self.stats.board_changes += 1
            self._emit(BoardChanged(t_s=self._t_s, old_channels=old, channels=width))
        self._streak_width, self._streak = None, 0
        self._add_frames(np.array([seq], dtype=np.int64), np.array([values], dtype=np.int64))

    def accept_run(self, seq: np.ndarray, readings: np.ndarray, checked: bool) -> None:
        """Frames of the known width that passed every line rule in bulk, in order.

        `seq` is -1 for every row of a plain run; `checked` says some row carried a checksum.
        """
        if checked:
            self.strict = True
        self._streak_width, self._streak = None, 0
        if seq[0] < 0:
            self._add_frames(seq, readings)
            return
        prev = np.empty_like(seq)
        prev[1:] = seq[:-1]
        prev[0] = seq[0] - 1 if self.last_seq is None else self.last_seq
        odd = np.flatnonzero((seq - prev) % SEQ_MODULUS != 1).tolist()
        start = 0
        for k in odd:
            if k > start:
                self._add_frames(seq[start:k], readings[start:k])
                self.last_seq = int(seq[k - 1])
            self._step_seq(int(seq[k]))
            start = k
        self._add_frames(seq[start:], readings[start:])
        self.last_seq = int(seq[-1])
