"""The one pipeline every live front end runs on: drain the link, record, feed the session.

The live screen (through `tui.session_source.SessionSource`), `padtune monitor`, `padtune record` and
`padtune check` each build a `Pipeline` over their link and call `step()`: it takes what the link's
reader thread queued, hands it to the recording (a `tui.recorder.Recorder`, whose own thread writes
it: a slow or full disk never holds up this call), then feeds the session through the front end's
`feed` (the session's own `handle` by default; `monitor` feeds its `DetectionRun`, `check` its
`UnitProbe`). A recording that stopped by itself is reported once, in the step's `recording_errors`.

Headless commands loop with `run()` (a step every `tick_s` until a deadline, a stop or a condition)
and end with `finish()` (stop the link, take what came before the stop); `run_to_end()` is both and
the recording's close, for `monitor` and `record`. The screen calls `step()`
from its timer instead. `replay` has no link: its `DetectionRun` is fed directly. This module is a
thin shell (threads, time, files); the pure parts it drives live in `processing/`.
"""

from __future__ import annotations

import os
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Protocol, runtime_checkable

from processing.detections import DetectionEvent
from processing.recording_format import Mark
from processing.session import Session
from protocol.errors import UserError
from protocol.events import Event, LinkState, LinkStats
from tui.recorder import CLOSE_TIMEOUT_S, Recorder

TICK_S = 0.02

# What a front end does with a step's events: (events, host time now) -> detections.
Feed = Callable[[Sequence[Event], float], list[DetectionEvent]]


class Producer(Protocol):
    """What the pipeline needs of a link: `protocol.link.Link` provides it, and so do the test feeds."""

    def drain(self, max_events: int | None = None) -> list[Event]: ...
    def write(self, data: bytes) -> bool | None: ...
    @property
    def stats(self) -> LinkStats: ...
    @property
    def state(self) -> LinkState: ...


@runtime_checkable
class Stoppable(Protocol):
    def stop(self) -> None: ...


class StopSignal(Protocol):
    """Anything with a `stopped` flag (`tui.headless.ports.StopFlag`, set by SIGINT/SIGTERM)."""

    stopped: bool


@dataclass(slots=True)
class Step:
    """What one step brought: the link's events in stream order, the detections the feed returned,
    and the reasons a recording stopped by itself since the last step (each reported once)."""

    events: list[Event] = field(default_factory=list)
    detections: list[DetectionEvent] = field(default_factory=list)
    recording_errors: list[str] = field(default_factory=list)
    t_s: float = 0.0


class Pipeline:
    def __init__(self, link: Producer, session: Session | None = None, *, feed: Feed | None = None,
                 clock: Callable[[], float] = time.monotonic, source: str = "") -> None:
        """`session` None with no `feed`: nothing is detected (`padtune record`). `source` names the port
        in recordings."""
        self.link, self.session, self.clock, self.source = link, session, clock, source
        self._feed: Feed | None = feed if feed is not None else (
            (lambda events, now: session.handle(events)) if session is not None else None)
        self._recorder: Recorder | None = None
        self._closing: list[_Closing] = []  # stopped recordings whose thread still writes their end
        self._error: str | None = None  # why the last recording stopped by itself
        self._untold: list[str] = []  # failures found, for the next step's `recording_errors`

    # -- one step ---------------------------------------------------------------------------------
    def step(self) -> Step:
        events = self.link.drain()
        now = self.clock()
        if self._recorder is not None and events:
            self._recorder.write_events(events)
        # The feed runs on every step, events or not: a status or a held notice is due by the clock.
        detections = self._feed(events, now) if self._feed is not None else []
        self._collect_failures()
        told, self._untold = self._untold, []
        return Step(events, detections, told, now)

    def _collect_failures(self) -> None:
        """Move a recording that stopped by itself out of the way and keep its reason to tell once."""
        rec = self._recorder
        if rec is not None and rec.error is not None:
            self._recorder = None
            self._closing.append(_Closing(rec, told=True))  # its thread still closes the file
            self._untold.append(rec.error)
            self._error = rec.error
        for closing in [c for c in self._closing if c.recorder.finished]:
            self._closing.remove(closing)
            if closing.recorder.error is not None and not closing.told:
                self._untold.append(closing.recorder.error)
                self._error = closing.recorder.error

    # -- recording --------------------------------------------------------------------------------
    @property
    def recorder(self) -> Recorder | None:
        """The recording being written (None when none is, or it stopped by itself)."""
        rec = self._recorder
        return rec if rec is not None and rec.error is None else None

    @property
    def recording_path(self) -> Path | None:
        rec = self.recorder
        return rec.path if rec is not None else None

    @property
    def recording_error(self) -> str | None:
        """Why the last recording stopped by itself (a full disk, a disk that did not keep up)."""
        rec = self._recorder
        return rec.error if rec is not None and rec.error is not None else self._error

    def start_recording(self, path: str | os.PathLike[str], *, origin_t_s: float | None = None,
                        overwrite: bool = False) -> Recorder:
        """Open a recording (UserError at once for a bad name, an existing file, a full disk). Started
        mid-session, it begins with the board's info so names and polarity are in the file."""
        if self._recorder is not None and self._recorder.error is None:
            raise UserError(f"already recording to {self._recorder.path}")
        self._collect_failures()  # a failed one still held is told with the next step's errors
        info = self.session.info if self.session is not None else None
        self._recorder = Recorder(path, source=self.source, clock=self.clock, origin_t_s=origin_t_s,
                                  info=info, overwrite=overwrite)
        self._error = None
        return self._recorder

    def stop_recording(self) -> Path | None:
        """Stop taking rows and let the writer thread finish the file; returns at once. A failure to
        write the last rows is reported in a later step's `recording_errors`; one already known
        raises UserError here (and is not reported again)."""
        rec, self._recorder = self._recorder, None
        if rec is None:
            return None
        rec.request_close()
        self._closing.append(_Closing(rec, told=rec.error is not None))
        if rec.error is not None:
            self._error = rec.error
            raise UserError(rec.error)
        return rec.path

    def mark(self, t_s: float, kind: str = "note", channel: str | None = None, text: str = "") -> Mark | None:
        """Hand a mark to the recording (None when nothing is recorded). An unknown kind raises
        UserError; a failed write comes back in a step's `recording_errors`."""
        rec = self.recorder
        return rec.mark(t_s, kind, channel, text) if rec is not None else None

    def settle(self, timeout_s: float) -> bool:
        """Wait (at most `timeout_s`) until every writer thread has dealt with what it was handed and
        stopped recordings are closed; True when they have. For tests: never a sleep."""
        deadline = time.monotonic() + timeout_s
        active = [self._recorder] if self._recorder is not None else []
        for rec in active + [c.recorder for c in self._closing]:
            left = max(0.0, deadline - time.monotonic())
            done = rec.settle(left) if rec.accepting else rec.wait(left)
            if not done:
                return False
        return True

    def close_recording(self, timeout_s: float = CLOSE_TIMEOUT_S) -> Path | None:
        """Stop the recording and wait (at most `timeout_s` in all) for every writer to finish its file.

        Raises UserError with the first problem not told yet: a failed write, or a file not finished
        in time. For the end of a headless run and the screen's exit."""
        path = self.recording_path
        rec, self._recorder = self._recorder, None
        if rec is not None:
            rec.request_close()
            self._closing.append(_Closing(rec))
        deadline = time.monotonic() + timeout_s
        problems = []
        for closing in self._closing:
            try:
                closing.recorder.close(max(0.0, deadline - time.monotonic()))
            except UserError as exc:
                if not closing.told or not closing.recorder.finished:
                    problems.append(str(exc))
        self._closing.clear()
        if problems:
            self._error = problems[0]
            raise UserError(problems[0])
        return path

    # -- the headless loop ------------------------------------------------------------------------
    def run(self, *, until_s: float | None = None, stop: StopSignal | None = None,
            done: Callable[[], bool] | None = None, on_step: Callable[[Step], None] | None = None,
            tick_s: float = TICK_S) -> None:
        """Step every `tick_s` until the clock reaches `until_s`, `stop.stopped`, or `done()` after a
        step. Ctrl-C where no signal handler could be set (not the main thread) counts as a stop."""
        try:
            while not (stop is not None and stop.stopped):
                step = self.step()
                if on_step is not None:
                    on_step(step)
                if done is not None and done():
                    return
                now = self.clock()
                if until_s is not None and now >= until_s:
                    return
                time.sleep(tick_s if until_s is None else max(0.0, min(tick_s, until_s - now)))
        except KeyboardInterrupt:
            if stop is None:
                raise
            stop.stopped = True

    def run_to_end(self, *, until_s: float | None, stop: StopSignal | None,
                   on_step: Callable[[Step], None] | None = None) -> Step:
        """`monitor`'s and `record`'s whole run: `run`, then `finish`, then the recording closed (waiting
        at most a few seconds; UserError if its end could not be written). Whatever happens, the link
        is stopped, and a recording still open is asked to finish on its own thread."""
        try:
            self.run(until_s=until_s, stop=stop, on_step=on_step)
            last = self.finish(on_step)
            self.close_recording()
            return last
        finally:
            if isinstance(self.link, Stoppable):
                self.link.stop()  # safe twice; on an error this is what stops the reader
            if self._recorder is not None:
                self._recorder.request_close()

    def finish(self, on_step: Callable[[Step], None] | None = None) -> Step:
        """Stop the link and take what it read before it stopped (nothing is lost at the end)."""
        if isinstance(self.link, Stoppable):
            self.link.stop()
        step = self.step()
        if on_step is not None:
            on_step(step)
        return step


@dataclass(slots=True)
class _Closing:
    """A stopped recording whose thread still finishes the file; `told`: its failure was reported."""

    recorder: Recorder
    told: bool = False
