"""Recording on a writer thread: the caller hands rows over and returns at once; a slow or full disk never
stalls the screen, the headless loop or the link's reader.

`Recorder` opens the file on the caller's thread (so a bad name, an existing file or a disk already full
is refused in place, as one `UserError` line) and writes the format's head there; from then on a thread
of its own owns the `processing.recording.RecordingWriter`: it formats the rows, hands them to the OS
every `flush_interval_s` (whole rows only, as the writer always has) and fsyncs on close.

The hand-over is a bounded queue (`max_pending_readings` readings, `max_pending_items` batches): a disk
that cannot keep up stops the recording rather than let memory grow; what was queued before is still
written. A failed write (a full disk, a vanished drive) stops it too; the rows handed to the OS before
stay in the file. Either way `error` says why in one line, and the caller reports it (`tui.pipeline`
puts it in the tick's errors); nothing raises into the caller's loop. Events are treated as read-only
once handed over (FrameBlocks are never changed after the link made them).
"""

from __future__ import annotations

import logging
import os
import threading
import time
from collections import deque
from collections.abc import Callable, Iterable
from pathlib import Path

from processing.recording import MARK_KINDS, Mark, RecordingWriter
from protocol.errors import UserError
from protocol.events import BoardInfo, Event, FrameBlock

log = logging.getLogger(__name__)

CLOSE_TIMEOUT_S = 5.0
# About a minute of a 64-channel board at 1 kHz (or 40 min of 16 channels at 100 Hz) may wait for the
# disk before the recording gives up: ~32 MB of readings (common practice for a bounded hand-over, no source).
MAX_PENDING_READINGS = 4_000_000
MAX_PENDING_ITEMS = 100_000


class Recorder:
    """One recording being written by its own thread; every call returns without waiting for the disk
    (except `close`, which waits at most `timeout_s`, and `settle`)."""

    def __init__(self, path: str | os.PathLike[str], *, source: str = "", origin_t_s: float | None = None,
                 clock: Callable[[], float] = time.monotonic, info: BoardInfo | None = None,
                 overwrite: bool = False, flush_interval_s: float = 0.25,
                 meta: dict[str, object] | None = None,
                 max_pending_readings: int = MAX_PENDING_READINGS,
                 max_pending_items: int = MAX_PENDING_ITEMS) -> None:
        # Opening and the head (a few short lines) on the caller's thread: its refusals are immediate.
        self.writer = RecordingWriter(path, source=source, origin_t_s=origin_t_s, clock=clock, info=info,
                                      overwrite=overwrite, flush_interval_s=flush_interval_s, meta=meta)
        self.path: Path = self.writer.path
        self.origin_t_s: float = self.writer.origin_t_s
        self.max_pending_readings, self.max_pending_items = max_pending_readings, max_pending_items
        self._cond = threading.Condition()
        self._queue: deque[Mark | list[Event]] = deque()
        self._pending_readings = 0
        self._busy = False  # the thread holds items taken from the queue
        self._closing = False  # no more items are taken; the thread writes what is queued and closes
        self._error: str | None = None
        self._thread = threading.Thread(target=self._run, name=f"recorder {self.path.name}", daemon=True)
        self._thread.start()

    # -- the caller's side ------------------------------------------------------------------------
    @property
    def error(self) -> str | None:
        """Why the recording stopped by itself (a failed write, a disk that did not keep up), else None."""
        return self._error

    @property
    def accepting(self) -> bool:
        """True while rows are taken: not failed, not closing."""
        return self._error is None and not self._closing

    @property
    def finished(self) -> bool:
        """The thread is done: everything handed over is written (or the recording failed) and closed."""
        return not self._thread.is_alive()

    @property
    def frames_written(self) -> int:
        """Frames formatted into the file so far (all that were handed over, once `close` returned)."""
        return self.writer.frames_written

    @property
    def marks_written(self) -> int:
        """Marks written into the file so far (all that were handed over, once `close` returned)."""
        return self.writer.marks_written

    def write_events(self, events: Iterable[Event]) -> None:
        """Hand a batch over (in stream order with marks). After a failure or a close, nothing is kept."""
        batch = list(events)
        if batch:
            readings = sum(ev.readings.size for ev in batch if isinstance(ev, FrameBlock))
            self._put(batch, readings)

    def mark(self, t_s: float, kind: str = "note", channel: str | None = None, text: str = "") -> Mark:
        """Hand over a mark at event-clock time `t_s`; returns it with its recording-relative time.
        An unknown kind is a UserError here and now (nothing is written)."""
        if kind not in MARK_KINDS:
            raise UserError(f"unknown mark kind {kind!r}: use one of {', '.join(MARK_KINDS)}")
        self._put(Mark(t_s, kind, channel, text), 0)
        return Mark(t_s - self.origin_t_s, kind, channel, text)

    def _put(self, item: Mark | list[Event], readings: int) -> bool:
        with self._cond:
            if not self.accepting:
                return False
            if (self._pending_readings + readings > self.max_pending_readings
                    or len(self._queue) >= self.max_pending_items):
                self._error = (f"writing the recording {self.path} fell too far behind (a slow or stuck "
                               f"disk): {self._pending_readings} readings were waiting; it stopped there, "
                               "and what was waiting is still written")
                self._closing = True
                self._cond.notify_all()
                return False
            self._queue.append(item)
            self._pending_readings += readings
            self._cond.notify_all()
        return True

    def request_close(self) -> None:
        """Stop taking rows; the thread writes what is queued, fsyncs and closes. Returns at once."""
        with self._cond:
            self._closing = True
            self._cond.notify_all()

    def settle(self, timeout_s: float) -> bool:
        """Wait (at most `timeout_s`) until the thread has dealt with everything handed over so far:
        True when it has. Tests use it instead of sleeping; `close` waits for the thread's end."""
        deadline = time.monotonic() + timeout_s
        with self._cond:
            while (self._queue or self._busy) and self._thread.is_alive():
                left = deadline - time.monotonic()
                if left <= 0:
                    return False
                self._cond.wait(left)
        return True

    def wait(self, timeout_s: float) -> bool:
        """Wait (at most `timeout_s`) for the thread to end after a close request; True when it has."""
        self._thread.join(timeout_s)
        return self.finished

    def close(self, timeout_s: float = CLOSE_TIMEOUT_S) -> None:
        """Finish the file (write what is queued, fsync, close), waiting at most `timeout_s`.

        Raises UserError when the recording failed (the reason) or could not be finished in time (the
        thread goes on in the background; a reader drops a partial last row, so the file stays readable).
        """
        self.request_close()
        if not self.wait(timeout_s):
            raise UserError(f"the recording {self.path} was not finished within {timeout_s:g} s (a slow or "
                            "stuck disk): its last rows may be missing")
        if self._error is not None:
            raise UserError(self._error)

    def __enter__(self) -> Recorder:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    # -- the writer thread ------------------------------------------------------------------------
    def _run(self) -> None:
        writer = self.writer
        try:
            while True:
                with self._cond:
                    if not self._queue and not self._closing:
                        self._cond.wait(writer.flush_interval_s)  # woken by work, or time to flush
                    items = list(self._queue)
                    self._queue.clear()
                    self._pending_readings = 0
                    closing = self._closing and not items
                    self._busy = bool(items)
                try:
                    for item in items:
                        if isinstance(item, Mark):
                            writer.mark(item.t_s, item.kind, item.channel, item.text)
                        else:
                            writer.write_events(item)
                    writer.maybe_flush()
                    if closing:
                        writer.close()  # the last rows, then fsync
                        return
                finally:
                    with self._cond:
                        self._busy = False
                        self._cond.notify_all()
        except UserError as exc:  # the writer closed its file and said why in one line
            self._fail(str(exc))
        except Exception as exc:  # a bug: never lost silently, the recording stops and says so
            log.exception("recording thread failed")
            self._fail(f"writing the recording {self.path} stopped: {exc!r}; the rows written before "
                       "are kept")
        finally:
            if not writer.closed:
                try:
                    writer.close()
                except UserError as exc:
                    self._fail(str(exc))

    def _fail(self, reason: str) -> None:
        with self._cond:
            if self._error is None:
                self._error = reason
            self._closing = True
            self._queue.clear()
            self._pending_readings = 0
            self._cond.notify_all()
