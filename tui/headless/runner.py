"""The headless detection loop shared by `monitor` and `replay`: events in, output calls out.

`DetectionRun.feed(events, now_t_s)` hands the events to the processing Session, turns detections and
link events into `Output` calls (times in seconds since the run's origin), emits a status every
`every_s` and counts what the summary needs. Counting from the events themselves (not from the link's
statistics) makes a replay's summary match the live run's.

Notices for people go to `warn` (stderr by default) through a `NoticeGate`: at most one line per second
per kind, repeats counted, so a board that resets on every line cannot flood stderr. With
`link_warnings` (a live run: `monitor`), the link's diagnoses (silent, unreadable, wrong baud rate,
repeated sequence numbers) are told there too, as well as in the output's link events.
"""

from __future__ import annotations

import math
import sys
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

from processing.detections import DetectionEvent, GroupChange, Release, SliderChange, StuckRelease, Touch
from processing.recording_format import Mark
from processing.session import Session
from processing.twin import TwinMismatch
from protocol.events import (
    BoardChanged,
    BoardInfo,
    Event,
    FaultKind,
    FrameBlock,
    LinkFault,
    LinkStats,
    LinkStatus,
    Note,
    StreamForm,
)
from tui.headless.notices import NoticeGate
from tui.headless.output import Output

# The link events named in the JSON format; faults not listed pass under their own kind names.
_FAULT_EVENTS = {FaultKind.LOST: "lost", FaultKind.RESET: "reset", FaultKind.GARBLED: "garbled",
                 FaultKind.BOARD_CHANGED: "board changed"}
_SUMMARY_FAULTS = {FaultKind.LOST: "lost", FaultKind.GARBLED: "garbled",
                   FaultKind.BAD_CHECKSUM: "bad_checksum", FaultKind.OVERLONG: "overlong",
                   FaultKind.RESET: "resets", FaultKind.OVERFLOW: "overflow", FaultKind.DROPPED: "dropped"}
# Link faults a person running `monitor` is told on stderr (their details are whole sentences).
_TOLD_FAULTS = (FaultKind.SILENT, FaultKind.UNREADABLE, FaultKind.BAUD_SUSPECT, FaultKind.REPEATED)


def _num(value: float | None) -> float | None:
    if value is None or not math.isfinite(value):
        return None
    return round(float(value), 3)


def _sign(polarity: int | None) -> str | None:
    return None if polarity is None else "+" if polarity > 0 else "-"


def info_dict(info: BoardInfo, form: StreamForm | None = None) -> dict[str, Any]:
    """An info line's `hello`: its keys, and the form the data comes in (v1 unless a plain form was
    recognised in this session)."""
    return {"board": info.board, "channels": info.channels, "rate_hz": info.rate_hz,
            "names": list(info.names), "method": info.method,
            "polarity": ["+" if p > 0 else "-" for p in info.polarity], "fw": info.fw,
            "proto": info.proto, "fields": dict(info.fields), **form_dict(form)}


def form_dict(form: StreamForm | None) -> dict[str, Any]:
    if form is None:
        return {"form": "v1", "scale": 1, "time_column": False}
    return {"form": form.form, "scale": form.scale, "time_column": form.time_column}


def stream_form_dict(form: StreamForm, info: BoardInfo | None, channels: int | None) -> dict[str, Any]:
    """A plain form's `hello`: the form, and the board and channel count known so far (else None)."""
    return {"board": info.board if info else None, "channels": channels, **form_dict(form),
            "names": list(form.names), "detail": form.detail}


def warn_on_stderr(text: str) -> None:
    """Session notices (a profile made for another board, a re-baseline) go to stderr, so stdout keeps
    its format (JSON Lines stay pure) and a person still sees them."""
    sys.stderr.write(f"padtune: {text}\n")
    sys.stderr.flush()


@dataclass
class FoundTouch:
    """A touch as the run saw it (kept so tests and replays can compare runs)."""

    channel: int
    name: str
    index: int
    t: float
    delta_counts: int
    expected: bool | None = None  # against the recording's marks, None without marks


class MarkIndex:
    """The marks a touch is judged against, sorted once: per key the spans from each touch-start (less
    the tolerance) to the touch-end that closes it, and the times of note marks. `expected` answers as
    a walk through the marks in time order would (a touch-end closes the latest open touch-start of its
    key; an end with nothing open is skipped)."""

    def __init__(self, marks: Sequence[Mark], tolerance_s: float) -> None:
        self.tolerance_s = tolerance_s
        self.judges = any(m.kind == "touch-start" for m in marks)
        self.spans: dict[str | None, list[tuple[float, float]]] = {}
        self.notes: list[float] = []
        opened: dict[str | None, float] = {}
        for m in sorted(marks, key=lambda m: m.t_s):  # stable: marks at one time keep their order
            if m.kind == "touch-start":
                opened[m.channel] = m.t_s
            elif m.kind == "touch-end" and m.channel in opened:
                self.spans.setdefault(m.channel, []).append((opened.pop(m.channel) - tolerance_s, m.t_s))
            elif m.kind == "note":
                self.notes.append(m.t_s)

    def expected(self, name: str, t: float) -> bool:
        if any(low <= t <= high for low, high in self.spans.get(name, ())):
            return True
        return any(abs(note_t - t) <= self.tolerance_s for note_t in self.notes)


@dataclass
class DetectionRun:
    session: Session
    output: Output
    origin_t_s: float = 0.0
    every_s: float | None = None
    marks: Sequence[Mark] = ()
    mark_tolerance_s: float = 1.0
    warn: Callable[[str], None] = warn_on_stderr
    link_warnings: bool = False
    gate: NoticeGate = field(default_factory=NoticeGate)
    frames: int = 0
    notes: int = 0
    counts: dict[str, int] = field(default_factory=lambda: dict.fromkeys(_SUMMARY_FAULTS.values(), 0))
    # A live run's silence at the end (`monitor`): seconds the port stayed open without a byte, or None.
    silent_s: float | None = None
    touches: list[FoundTouch] = field(default_factory=list)
    twin_count: int = 0  # the last twin report's count of disagreeing frames
    _next_status_t: float | None = None
    _board_changed_seen: bool = False
    _form: StreamForm | None = None  # the plain form of this session, if one was recognised
    _form_hello: StreamForm | None = None  # its hello waits for the first frame (to give the width)
    _marks_index: MarkIndex | None = None
    _marks_key: tuple[int, int, float] | None = None

    def name(self, channel: int) -> str:
        names = self.session.names
        return names[channel] if channel < len(names) else f"ch{channel}"

    def feed(self, events: Iterable[Event], now_t_s: float) -> list[DetectionEvent | TwinMismatch]:
        """Hand `events` to the session one by one and tell what happened; returns the detections (a
        `tui.pipeline.Feed`: `monitor`'s pipeline calls this, `replay` calls it with recorded events)."""
        found: list[DetectionEvent | TwinMismatch] = []
        for event in events:
            found.extend(self._event(event))
            if self.link_warnings and isinstance(event, LinkFault):
                told = link_fault_text(event)
                if told is not None:
                    self._tell(told, now_t_s, kind=event.kind.value)
            notices = self.session.notices
            while notices:
                self._tell(notices.popleft(), now_t_s)
        for line in self.gate.due(now_t_s):
            self.warn(line)
        self.maybe_status(now_t_s)
        return found

    def _tell(self, text: str, now_t_s: float, kind: str | None = None) -> None:
        for line in self.gate.add(text, now_t_s, kind):
            self.warn(line)

    def _rel(self, t_s: float) -> float:
        return t_s - self.origin_t_s

    def _event(self, event: Event) -> list[DetectionEvent | TwinMismatch]:
        if isinstance(event, FrameBlock):
            self._say_form(len(event) and event.channels)
            self.frames += len(event)
            found = self.session.handle([event])
            for det in found:
                self._detection(det)
            return found
        found = self.session.handle([event])  # detections come from frames: this is empty
        t = self._rel(event.t_s)
        if isinstance(event, BoardInfo):
            self._say_form(None)
            if event.new_session:
                self._form = None  # a restarted board's form is recognised afresh
            self.output.hello(t, info_dict(event, self._form))
        elif isinstance(event, StreamForm):
            self._say_form(None)
            self._form = self._form_hello = event
        elif isinstance(event, Note):
            self.notes += 1
            self.output.note(t, event.text)
        elif isinstance(event, LinkFault):
            if event.kind in _SUMMARY_FAULTS:
                self.counts[_SUMMARY_FAULTS[event.kind]] += event.count
            if event.kind == FaultKind.BOARD_CHANGED and self._board_changed_seen:
                self._board_changed_seen = False  # already told by the BoardChanged event
                return found
            self.output.link(t, _FAULT_EVENTS.get(event.kind, event.kind.value), event.count, event.detail)
        elif isinstance(event, BoardChanged):
            self._board_changed_seen = True
            self.output.link(t, "board changed", 1, f"{event.old_channels} -> {event.channels} channels")
        elif isinstance(event, LinkStatus):
            self.output.link(t, event.state.value, 1, event.detail)
        return found

    def _say_form(self, channels: int | None) -> None:
        """The waiting plain form's hello, with the width of the frames read in it when known."""
        form, self._form_hello = self._form_hello, None
        if form is None:
            return
        info = self.session.info
        if not channels:
            channels = len(form.names) or (info.channels if info else None)
        self.output.hello(self._rel(form.t_s), stream_form_dict(form, info, channels or None))

    def _detection(self, det: DetectionEvent | TwinMismatch) -> None:
        if isinstance(det, Touch):
            t = self._rel(det.t_s)
            found = FoundTouch(det.channel, self.name(det.channel), det.index, t, det.delta_counts,
                               self._expected(det.channel, t))
            self.touches.append(found)
            self.output.touch(t, found.name, det.index, det.delta_counts)
        elif isinstance(det, Release | StuckRelease):
            self.output.release(self._rel(det.t_s), self.name(det.channel), det.index, det.held_s,
                                stuck=isinstance(det, StuckRelease))
        elif isinstance(det, GroupChange):
            name = None if det.channel is None else self.name(det.channel)
            self.output.group(self._rel(det.t_s), det.group, name, det.index)
        elif isinstance(det, SliderChange):
            self.output.slider(self._rel(det.t_s), det.slider, det.position, det.touched, det.index)
        elif isinstance(det, TwinMismatch):
            self.twin_count = det.count
            self.output.twin_mismatch(self._rel(det.t_s), self.name(det.channel), det.index,
                                      det.board_state.name.lower(), det.padtune_state.name.lower(), det.count,
                                      det.seq)

    @property
    def judges_touches(self) -> bool:
        """Only touch marks say which touches were meant; a recording with plain notes alone does not."""
        return self._mark_index().judges

    def _expected(self, channel: int, t: float) -> bool | None:
        """With touch marks: was this touch inside a marked touch of its key (or near a note mark)?"""
        index = self._mark_index()
        if not index.judges:
            return None
        return index.expected(self.name(channel), t)

    def _mark_index(self) -> MarkIndex:
        """The marks sorted once (a replay judges every touch against them), made again if they change."""
        key = (id(self.marks), len(self.marks), self.mark_tolerance_s)
        if self._marks_key != key:
            self._marks_index, self._marks_key = MarkIndex(self.marks, self.mark_tolerance_s), key
        assert self._marks_index is not None
        return self._marks_index

    def maybe_status(self, now_t_s: float) -> None:
        if not self.every_s:
            return
        t = self._rel(now_t_s)
        if self._next_status_t is None:
            self._next_status_t = self.every_s
        if t >= self._next_status_t:
            self.output.status(t, self.status_rows())
            self._next_status_t = next_status_t(self._next_status_t, t, self.every_s)

    def status_rows(self) -> list[dict[str, Any]]:
        """Every channel now. `provisional`: its settings come from its noise, not a profile or an edit;
        `polarity`: "+", "-", or None while it is learned; `phase`: "measuring" (its quiet second),
        "learning" (its direction) or "ready" (it reports touches)."""
        rows = []
        for r in self.session.rows():
            q = r.quality
            rows.append({"name": r.name, "reading": r.reading, "baseline": r.baseline_counts,
                         "delta": r.delta_counts, "state": r.state.name.lower(),
                         "noise": _num(q.noise.rms_counts) if q.noise else None, "snr": _num(q.snr_pp),
                         "provisional": r.provisional, "polarity": _sign(r.polarity), "phase": r.phase})
        return rows

    def summary(self) -> dict[str, Any]:
        channels = []
        for r in self.session.rows():
            q = r.quality
            mine = [f for f in self.touches if f.channel == r.channel]
            row: dict[str, Any] = {
                "name": r.name, "index": r.channel, "touches": len(mine),
                "noise_rms": _num(q.noise.rms_counts) if q.noise else None,
                "noise_pp": _num(q.noise.pp_counts) if q.noise else None,
                "snr": _num(q.snr_pp) if q.signal_counts is not None else None,
            }
            if self.judges_touches:
                row["false_touches"] = sum(1 for f in mine if f.expected is False)
            channels.append(row)
        twin = self.session.twin
        extra = {"twin_compared": twin.compared, "twin_mismatches": twin.count} if twin.active else {}
        silence = {} if self.silent_s is None else {"silent_s": round(self.silent_s, 1)}
        return {"frames": self.frames, **self.counts, "notes": self.notes, **silence, **extra,
                "channels": channels}

    def finish(self, now_t_s: float) -> dict[str, Any]:
        self._say_form(None)
        for line in self.gate.flush(now_t_s):  # repeats still held: their count is not lost
            self.warn(line)
        summary = self.summary()
        self.output.summary(self._rel(now_t_s), summary)
        self.output.close()
        return summary


# A status is due every `every_s`; after a jump in time of more steps than this, the next one is due an
# interval after the jump instead of stepping through every missed one (a recording whose time leaps to
# 1e12 s must not step a trillion times).
STATUS_CATCH_UP_STEPS = 1000


def next_status_t(due_t_s: float, now_t_s: float, every_s: float) -> float:
    """When the status after the one just given at `now_t_s` is due (strictly after `now_t_s`)."""
    if now_t_s - due_t_s < STATUS_CATCH_UP_STEPS * every_s:
        while due_t_s <= now_t_s:
            moved = due_t_s + every_s
            if moved == due_t_s:  # so far out that a step no longer changes the float
                break
            due_t_s = moved
    if due_t_s <= now_t_s:
        due_t_s = now_t_s + every_s
        if due_t_s <= now_t_s:
            due_t_s = math.nextafter(now_t_s, math.inf)
    return due_t_s


def link_fault_text(event: Event) -> str | None:
    """The stderr sentence for a link diagnosis a person must be told (silent, unreadable, wrong baud
    rate, repeated sequence numbers); None for every other event."""
    if not isinstance(event, LinkFault) or event.kind not in _TOLD_FAULTS:
        return None
    return _fault_text(event)


def _fault_text(fault: LinkFault) -> str:
    if fault.kind == FaultKind.REPEATED:
        frames = "frame" if fault.count == 1 else "frames"
        return (f"{fault.count} {frames} repeated the previous sequence number"
                + (f" ({fault.detail})" if fault.detail else ""))
    return fault.detail or fault.kind.value


def never_spoke(stats: LinkStats, port: str, seconds_s: float) -> str | None:
    """A live run that ends without a single byte from an open port: the sentence that says so, or None
    when bytes came. A run too short for the link's own 2 s silence report would otherwise end as an
    empty success (0 frames and nothing said)."""
    if stats.bytes_in:
        return None
    return (f"{port} sent nothing in {seconds_s:.1f} s (the port is open, no bytes came): check that the "
            "board is powered and running and that this is its port")
