"""The per-line rules of the protocol and the decoder's state: the one place the rules live.

`LineRules` takes one complete line at a time (`line()`) or, from the fast decoder, a run of frames
already checked in bulk (`accept_run()`), keeps the session state (checksum strictness, known channel
count, the new-width streak, the last sequence number, the plain form and its hold) and the running
`LinkStats`, and collects events in stream order. Both decoders (`protocol.decoder` and
`protocol.decoder_plain`) share it, so they can only differ in how they find and convert frames, never
in what the rules say. How plain lines are read is `protocol.plainforms`'s; when and in which order is
decided here.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from protocol.commands import ANSWER_KINDS
from protocol.crc import crc16_ccitt_false, split_checksum
from protocol.events import (
    Answer,
    BoardChanged,
    BoardInfo,
    Event,
    FaultKind,
    FrameBlock,
    LinkFault,
    LinkStats,
    Note,
    StreamForm,
)
from protocol.framing import MAX_LINE_BYTES
from protocol.info import InfoError, merge_info, parse_info, split_fields
from protocol.plainforms import (
    FORM_LINES,
    Form,
    PlainLine,
    decide_form,
    is_text,
    parse_plain,
)

SEQ_MODULUS = 65536
# A number below the previous one but at most this far ahead of it counting on across 65535 -> 0 is
# the wrap with frames lost on the way; a longer jump back is a board reset. (Our choice; PROTOCOL.md.)
WRAP_WINDOW = 256
BOARD_CHANGE_FRAMES = 3
INT32_MIN, INT32_MAX = -(2**31), 2**31 - 1
# The hold of a plain form's first data lines ends at FORM_LINES data lines or at this many lines of
# any kind, so a board printing one number among pages of text still gets read, in bounded memory.
HOLD_MAX_LINES = 64
_BLANK = b" \t"
_SEPARATORS = b" \t,"
_PRINTABLE = bytes([9, *range(32, 127)])  # what an answer line may hold (deleted by translate)


def preview(line: bytes, limit: int = 40) -> str:
    """A short printable rendering of a dropped line for fault details, quoted, every byte that is not
    printable ASCII as one escape (`\\xff`, `\\t`): escaped once, never the escape escaped again."""
    return repr(line[:limit] + (b"..." if len(line) > limit else b""))[1:]  # bytes' repr without its b


def _count(count: int, noun: str) -> str:
    """`1 value`, `3 values`: counts in messages agree in number."""
    return f"{count} {noun}{'' if count == 1 else 's'}"


def _int32(token: bytes) -> int | None:
    """A decimal integer token (`-?[0-9]+`) within 32 bits, or None; never converts a huge token."""
    magnitude = token.lstrip(b"-").lstrip(b"0")
    if len(magnitude) > 10:
        return None
    value = int(magnitude or b"0")
    if token[:1] == b"-":
        value = -value
    return value if INT32_MIN <= value <= INT32_MAX else None


STATE_DIGITS = b"0123"  # a state field's characters (processing.detections.KeyState's values)
_STATE_TO_INT = bytes.maketrans(STATE_DIGITS, bytes(range(4)))


def split_states(body: bytes) -> tuple[bytes, bytes | None]:
    """(frame body, state field or None): the field is what follows the frame's `;` (PROTOCOL.md 3)."""
    head, semi, field = body.partition(b";")
    return (head, field) if semi else (body, None)


def state_problem(field: bytes, width: int) -> str | None:
    """Why a state field cannot belong to a frame of `width` values, or None when it can."""
    if len(field) != width:
        return f"state field of {_count(len(field), 'digit')} for {_count(width, 'value')}"
    if field.strip(STATE_DIGITS):
        return "state field with a character other than 0, 1, 2, 3"
    return None


def state_values(field: bytes) -> list[int]:
    return list(field.translate(_STATE_TO_INT))


def parse_frame(body: bytes) -> tuple[int, list[int]] | None:
    """(seq or -1, values) of a v1 frame body (`@seq v0 v1 ...` or `v0 v1 ...`), None if malformed.

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
        seq = int(body[1:end]) if end < 12 else SEQ_MODULUS
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
            value = _int32(token)
            if value is None:
                return None
            values.append(value)
    return seq, values


@dataclass
class _Hold:
    """Lines kept back until a plain form is decided: every line in order (None = an overlong line)
    with the host time it completed, and the plain data lines among them."""

    lines: list[tuple[bytes | None, float]] = field(default_factory=list)
    data: list[PlainLine] = field(default_factory=list)
    channels: int | None = None  # `channels` of an info line inside the hold


class LineRules:
    """Session state, statistics and the ordered event list of one decoder."""

    def __init__(self, max_line_bytes: int = MAX_LINE_BYTES) -> None:
        self.max_line_bytes = max_line_bytes
        self.stats = LinkStats()
        self.info: BoardInfo | None = None
        self.channels: int | None = None
        self.strict = False  # a valid checksummed line was seen since the last info line
        self.last_seq: int | None = None
        self.form: Form | None = None  # the plain form unsequenced data lines are read in
        # No plain form: unsequenced integer lines are v1 plain frames, read at once (no hold). Set by a
        # sequenced frame, or by integer columns of an info line's channel count.
        self._v1 = False
        self._hold: _Hold | None = None
        self._announced: tuple | None = None  # the key of the last StreamForm emitted
        self._shape_streak: tuple | None = None  # a new shape of plain lines, and how many in a row
        self._shape_count = 0
        self._last_board_time: int | None = None
        self._repeats_reported = 0
        self._streak_width: int | None = None
        self._streak = 0
        self._events: list[Event] = []
        self._seqs: list[np.ndarray] = []
        self._rows: list[np.ndarray] = []
        self._times: list[np.ndarray] = []
        self._states: list[np.ndarray] = []  # int8 (n, width) parts: the frames' state fields
        self._single_states: list[list[int]] = []
        self._single_rows: list[list[int]] = []  # frames taken one at a time, not yet an array
        self._single_seqs: list[int] = []
        self._single_times: list[int] = []
        self._rows_width = -1  # the pending block's width (-1: no block pending)
        self._rows_timed = False
        self._rows_stated = False
        self._rows_t_s = 0.0
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

    @property
    def holding(self) -> int:
        """How many data lines of a plain form are held back while its form is decided (0: none)."""
        return len(self._hold.data) if self._hold is not None else 0

    @property
    def bulk_plain(self) -> bool:
        """Unsequenced frames of the known width may be taken in bulk (they are v1 plain frames)."""
        form = self.form
        if self._hold is not None:
            return False
        return form.plain_v1 and form.width == self.channels if form is not None else self._v1

    def _flush(self) -> None:
        self._seal_singles()
        if not self._rows:
            return
        readings = self._rows[0] if len(self._rows) == 1 else np.concatenate(self._rows)
        seq = self._seqs[0] if len(self._seqs) == 1 else np.concatenate(self._seqs)
        board_time = None
        if self._times:
            board_time = self._times[0] if len(self._times) == 1 else np.concatenate(self._times)
        board_states = None
        if self._states:
            board_states = self._states[0] if len(self._states) == 1 else np.concatenate(self._states)
        n = readings.shape[0]
        t_s = np.full(n, self._rows_t_s, dtype=np.float64)
        self._events.append(FrameBlock(t_s=t_s, seq=seq, readings=readings, first_index=self._pending_first,
                                       board_time=board_time, board_states=board_states))
        self._rows, self._seqs, self._times, self._states = [], [], [], []
        self._rows_width = -1

    def _seal_singles(self) -> None:
        """Frames taken one by one wait as lists; one conversion makes them a block part."""
        if not self._single_rows:
            return
        self._rows.append(np.array(self._single_rows, dtype=np.int64))
        self._seqs.append(np.array(self._single_seqs, dtype=np.int64))
        if self._single_times:
            self._times.append(np.array(self._single_times, dtype=np.int64))
        if self._single_states:
            self._states.append(np.array(self._single_states, dtype=np.int8))
        self._single_rows, self._single_seqs, self._single_times = [], [], []
        self._single_states = []

    def _emit(self, event: Event) -> None:
        self._flush()
        self._events.append(event)

    def _fault(self, kind: FaultKind, count: int = 1, detail: str = "") -> None:
        self._emit(LinkFault(t_s=self._t_s, kind=kind, count=count, detail=detail))

    def _start_rows(self, width: int, timed: bool, stated: bool = False) -> None:
        """Frames join the pending block only with its width, host time, time column (or none) and
        state field (or none)."""
        if self._rows_width >= 0 and (self._rows_width != width or self._rows_t_s != self._t_s
                                      or self._rows_timed != timed or self._rows_stated != stated):
            self._flush()
        if self._rows_width < 0:
            self._pending_first = self.stats.frames
            self._rows_t_s, self._rows_width, self._rows_timed = self._t_s, width, timed
            self._rows_stated = stated

    def _add_frames(self, seq: np.ndarray, readings: np.ndarray, states: np.ndarray | None = None) -> None:
        self._start_rows(readings.shape[1], False, states is not None)
        self._seal_singles()
        self._rows.append(readings)
        self._seqs.append(seq)
        if states is not None:
            self._states.append(states)
        self.stats.frames += readings.shape[0]

    def _add_frame(self, seq: int, values: list[int], board_time: int | None,
                   states: list[int] | None = None) -> None:
        self._start_rows(len(values), board_time is not None, states is not None)
        self._single_rows.append(values)
        self._single_seqs.append(seq)
        if board_time is not None:
            self._single_times.append(board_time)
        if states is not None:
            self._single_states.append(states)
        self.stats.frames += 1

    # -- lines ------------------------------------------------------------------------------------
    def overlong(self) -> None:
        if self._hold is not None:
            self._hold.lines.append((None, self._t_s))
            self._hold_full()
            return
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
        """Apply every rule to one line (its line end removed)."""
        if line[:1] == b">" and len(line) <= self.max_line_bytes:
            self._answer(line)  # never held: a command's answer must not wait for a plain form
            return
        if self._hold is not None:
            self._hold_line(line)
            return
        if len(line) > self.max_line_bytes:
            self.overlong()
            return
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
            return
        if first == b"#":
            self.stats.notes += 1
            self._emit(Note(t_s=self._t_s, text=body[1:].strip(_BLANK).decode("ascii", "replace")))
            return
        if first == b"@":
            if given is None and self.strict:
                self.bad_checksum(line, "no checksum after checksummed lines")
                return
            self._stated_frame(line, body)
            return
        lead = first if first not in (b" ", b"\t") else body.lstrip(_BLANK)[:1]
        looks_like_data = lead == b"-" or lead.isdigit()
        if looks_like_data and given is None and self.strict:  # checked before parsing, as in v1
            self.bad_checksum(line, "no checksum after checksummed lines")
            return
        if looks_like_data and b";" in body:  # a v1 plain frame with a state field (never a plain form)
            self._shape_streak, self._shape_count = None, 0
            self._stated_frame(line, body)
            return
        plain = parse_plain(body)
        if plain is None:
            if looks_like_data:
                self.garbled(line, "malformed frame")
            elif is_text(body):
                self.stats.notes += 1
                if self.first_unreadable is None:
                    self.first_unreadable = line
                self._emit(Note(t_s=self._t_s, text=body.strip(_BLANK).decode("ascii")))
            else:
                self.garbled(line, "not a frame, info, comment or text line")
            return
        if given is None and self.strict:
            self.bad_checksum(line, "no checksum after checksummed lines")
            return
        self._plain(line, plain)

    def _answer(self, line: bytes) -> None:
        """An answer line (`>val`, `>ok`, `>no`, section 7): its own event, checked like any line;
        never a frame, never a session start. Another word after `>` is garbled."""
        body, given = split_checksum(line)
        if given is not None:
            if crc16_ccitt_false(body) != given:
                self.bad_checksum(line, "checksum mismatch")
                return
            self.strict = True
        kind, _, text = body[1:].partition(b" ")
        if body.translate(None, _PRINTABLE) or kind.decode("ascii") not in ANSWER_KINDS:
            self.garbled(line, "not an answer line (>val, >ok or >no)")
            return
        extra = self.stats.extra
        extra["answers"] = extra.get("answers", 0) + 1
        self._emit(Answer(t_s=self._t_s, kind=kind.decode("ascii"), text=text.strip(_BLANK).decode("ascii")))

    def _stated_frame(self, line: bytes, body: bytes) -> None:
        """A v1 frame, `@seq` or not, with or without its state field (PROTOCOL.md section 3)."""
        head, field = split_states(body)
        parsed = parse_frame(head)
        if parsed is None:
            self.garbled(line, "malformed frame")
            return
        states = None
        if field is not None:
            problem = state_problem(field, len(parsed[1]))
            if problem is not None:
                self.garbled(line, problem)
                return
            states = state_values(field)
            self._v1 = True  # only a v1 frame carries the field: later plain lines are v1 frames too
        self.frame(parsed[0], parsed[1], states=states)

    def _info_line(self, line: bytes, text: bytes, checked: bool) -> None:
        try:
            info = _parse_info_text(text, self._t_s)
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
            self.form = None  # a restarted board's plain form is recognised afresh
            self._v1 = False
            self._announced = None
            self._shape_streak, self._shape_count = None, 0
            self._last_board_time = None
        if info.channels is not None:
            self.channels = info.channels
        self._streak_width, self._streak = None, 0
        self._emit(info)
        if old is not None and self.channels is not None and self.channels != old:
            self.stats.board_changes += 1
            self._emit(BoardChanged(t_s=self._t_s, old_channels=old, channels=self.channels))

    # -- plain forms ------------------------------------------------------------------------------
    def _plain(self, line: bytes, plain: PlainLine) -> None:
        """A data line of a plain form: held while the form is being decided, else read in it."""
        form = self.form
        if form is None:
            if self._v1 or self._announced_width(plain):
                self._v1_line(line, plain)
            else:
                self._start_hold(line)
            return
        if plain.shape != form.shape:
            self._other_shape(line, plain)
            return
        self._shape_streak, self._shape_count = None, 0
        result = form.read(plain)
        if isinstance(result, str):
            self.garbled(line, result)
            return
        board_time, values = result
        if board_time is not None:
            last, self._last_board_time = self._last_board_time, board_time
            if last is not None and board_time < last:
                self.stats.resets += 1
                self._fault(FaultKind.RESET, detail=f"board time went back: {last} -> {board_time}")
        self.frame(-1, values, board_time)

    def _announced_width(self, plain: PlainLine) -> bool:
        """Integer columns of an info line's channel count: a v1 board's plain frames, read at once."""
        info = self.info
        if info is not None and info.channels == len(plain.tokens) and _integer_columns(plain):
            self._v1 = True
        return self._v1

    def _v1_line(self, line: bytes, plain: PlainLine) -> None:
        """A plain line among v1 frames: integer columns are v1 plain frames (the v1 width rule);
        three lines in a row of one other form end the v1 reading and start the hold of a plain form."""
        if _integer_columns(plain):
            self._shape_streak, self._shape_count = None, 0
            values = [_int32(token) for token in plain.tokens]
            if None in values:
                self.garbled(line, "malformed frame")
            else:
                self.frame(-1, values)  # type: ignore[arg-type]
            return
        if self._count_shape(plain.shape) < BOARD_CHANGE_FRAMES:
            self.garbled(line, f"{_shape_text(plain.shape)} with decimals or names among v1 frames")
            return
        self._v1 = False
        self._start_hold(line)

    def _count_shape(self, shape: tuple) -> int:
        """How many plain lines in a row (other lines between them do not count) had this new shape."""
        if shape == self._shape_streak:
            self._shape_count += 1
        else:
            self._shape_streak, self._shape_count = shape, 1
        return self._shape_count

    def _other_shape(self, line: bytes, plain: PlainLine) -> None:
        """A plain line unlike the form: dropped, unless it is the third in a row of one new shape,
        which ends the form; that line then starts the hold of the next one."""
        form = self.form
        assert form is not None
        if self._count_shape(plain.shape) >= BOARD_CHANGE_FRAMES:
            self.form, self._v1 = None, False
            self._start_hold(line)
            return
        self.stats.width_mismatch += 1
        self._fault(FaultKind.WIDTH_MISMATCH, detail=f"{_shape_text(plain.shape)}, {_shape_text(form.shape)} "
                    f"expected: {preview(line)}")

    def _start_hold(self, line: bytes) -> None:
        self._shape_streak, self._shape_count = None, 0
        self._hold = _Hold()
        self._hold_line(line)

    def _hold_line(self, line: bytes) -> None:
        hold = self._hold
        assert hold is not None
        if len(line) > self.max_line_bytes:
            hold.lines.append((None, self._t_s))  # overlong: only its place is kept
        elif line.strip(_BLANK):
            body, given = split_checksum(line)
            if given is None or crc16_ccitt_false(body) == given:
                if body[:1] == b"!":
                    info = _info_or_none(body[1:], self._t_s)
                    if info is not None and info.new_session:
                        # A restarted board: decide on what came before it, then start afresh.
                        self.end_hold()
                        self.line(line)
                        return
                    if info is not None and info.channels is not None:
                        hold.channels = info.channels
                elif body[:1] == b"@" or (b";" in body and body.lstrip(_BLANK)[:1] in b"-0123456789"):
                    parsed = _v1_frame(body)
                    if parsed is not None:
                        # A sequenced frame: the board speaks v1, the held lines were strays (say the
                        # tail of a line cut by the port opening). Read them as v1, decide no form,
                        # and judge them by this frame's width when none is known yet.
                        self._v1 = True
                        if self.channels is None:
                            self.channels = len(parsed[1])
                        self.end_hold(decide=False)
                        self.line(line)
                        return
                elif body[:1] != b"#":
                    plain = parse_plain(body)
                    if plain is not None:
                        hold.data.append(plain)
            hold.lines.append((line, self._t_s))
        self._hold_full()

    def _hold_full(self) -> None:
        hold = self._hold
        if hold is not None and (len(hold.data) >= FORM_LINES or len(hold.lines) >= HOLD_MAX_LINES):
            self.end_hold()

    def end_hold(self, decide: bool = True) -> None:
        """Decide the form on the data lines held so far and apply every held line in order.

        Called when the hold is full, before a line that starts a new session, and by
        `Decoder.flush_hold()` (the end of a capture); with `decide=False` (a sequenced frame came) the
        held lines are applied without a form. A hold that starts again while its lines are applied
        (a new session among them) is kept: call again to end it too.
        """
        hold, self._hold = self._hold, None
        if hold is None:
            return
        if decide and hold.data:
            expected = hold.channels
            if expected is None and self.info is not None:
                expected = self.info.channels
            self._set_form(decide_form(hold.data, expected), hold.lines[0][1], len(hold.data))
        now = self._t_s
        for line, t_s in hold.lines:
            self._t_s = t_s
            if line is None:
                self.overlong()
            else:
                self.line(line)
        self._t_s = now

    def _set_form(self, form: Form, t_s: float, lines: int) -> None:
        now, self._t_s = self._t_s, t_s
        self.form = form
        self._last_board_time = None
        self._shape_streak, self._shape_count = None, 0
        if self.channels is not None and self.channels != form.channels:
            self.stats.board_changes += 1
            self._emit(BoardChanged(t_s=t_s, old_channels=self.channels, channels=form.channels))
            self._streak_width, self._streak = None, 0
        self.channels = form.channels
        if form.key != self._announced:
            self._announced = form.key
            self._emit(StreamForm(t_s=t_s, form=form.kind, names=form.key_names, scale=form.scale,
                                  time_column=form.time_column, detail=form.describe(lines)))
        self._t_s = now

    # -- frames -----------------------------------------------------------------------------------
    def _step_seq(self, seq: int) -> None:
        prev, self.last_seq = self.last_seq, seq
        if prev is None:
            return
        step = (seq - prev) % SEQ_MODULUS
        if step == 1:
            return
        if step == 0:
            self._repeated(seq)
        elif seq > prev or step <= WRAP_WINDOW:
            self.stats.lost += step - 1
            self._fault(FaultKind.LOST, count=step - 1, detail=f"seq {prev} -> {seq}")
        else:
            self.stats.resets += 1
            self._fault(FaultKind.RESET, detail=f"seq {prev} -> {seq}")

    def _repeated(self, seq: int) -> None:
        """The same number again: delivered, counted, reported at the 1st, 2nd, 4th, 8th... repeat."""
        extra = self.stats.extra
        total = extra["repeated"] = extra.get("repeated", 0) + 1
        if total & (total - 1) == 0:
            count, self._repeats_reported = total - self._repeats_reported, total
            plural = "s" if total > 1 else ""
            self._fault(FaultKind.REPEATED, count=count,
                        detail=f"seq {seq} repeated ({total} repeated frame{plural} so far)")

    def frame(self, seq: int, values: list[int], board_time: int | None = None,
              states: list[int] | None = None) -> None:
        """One well-formed frame (seq -1 when it had none; board_time from a time column, or None;
        states from its state field, or None)."""
        if seq >= 0:
            self._v1 = True
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
                self._fault(FaultKind.WIDTH_MISMATCH, detail=f"{_count(width, 'value')}, "
                            f"{_count(self.channels, 'channel')} expected")
                return
            old, self.channels = self.channels, width
            self.stats.board_changes += 1
            self._emit(BoardChanged(t_s=self._t_s, old_channels=old, channels=width))
        self._streak_width, self._streak = None, 0
        self._add_frame(seq, values, board_time, states)

    def accept_run(self, seq: np.ndarray, readings: np.ndarray, checked: bool,
                   states: np.ndarray | None = None) -> None:
        """Frames of the known width that passed every line rule in bulk, in order.

        `seq` is -1 for every row of a plain run; `checked` says some row carried a checksum; `states`
        (int8, the shape of `readings`) their state fields when every row carried one, else None.
        """
        if checked:
            self.strict = True
        self._streak_width, self._streak = None, 0
        if seq[0] < 0:
            self._shape_streak, self._shape_count = None, 0
            self._add_frames(seq, readings, states)
            return
        self._v1 = True
        prev = np.empty_like(seq)
        prev[1:] = seq[:-1]
        prev[0] = seq[0] - 1 if self.last_seq is None else self.last_seq
        odd = np.flatnonzero((seq - prev) % SEQ_MODULUS != 1).tolist()
        start = 0
        for k in odd:
            if k > start:
                self._add_frames(seq[start:k], readings[start:k], None if states is None else states[start:k])
                self.last_seq = int(seq[k - 1])
            self._step_seq(int(seq[k]))
            start = k
        self._add_frames(seq[start:], readings[start:], None if states is None else states[start:])
        self.last_seq = int(seq[-1])


def _v1_frame(body: bytes) -> tuple[int, list[int]] | None:
    """(seq, values) of a v1 frame whose state field, if any, is well-formed; else None."""
    head, field = split_states(body)
    parsed = parse_frame(head)
    if parsed is None or (field is not None and state_problem(field, len(parsed[1])) is not None):
        return None
    return parsed


def _integer_columns(plain: PlainLine) -> bool:
    return plain.kind == "columns" and not any(b"." in token for token in plain.tokens)


def _parse_info_text(text: bytes, t_s: float) -> BoardInfo:
    if not text.isascii():
        raise InfoError("info line is not ASCII")
    return parse_info(split_fields(text.decode("ascii")), t_s)


def _info_or_none(text: bytes, t_s: float) -> BoardInfo | None:
    try:
        return _parse_info_text(text, t_s)
    except InfoError:
        return None


def _shape_text(shape: tuple[str, tuple[bytes, ...], int]) -> str:
    kind, names, width = shape
    if not names:
        return f"{width} values"
    shown = b",".join(names).decode("ascii")
    return f"{kind} {shown[:40]}{'...' if len(shown) > 40 else ''}"
