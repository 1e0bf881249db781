"""The serial link: opens a port or URL, reads it on its own thread, decodes, hands events over.

Thin shell around the pure parts: `protocol.opening` (open with one-line errors), the decoder,
`protocol.eventbuffer` (bounded hand-over) and `protocol.linkwatch` (after each opening: ask the
board with `?`, wrong baud rate, unreadable stream, silence and stalls). The reader thread never
touches a UI: consumers call `drain()` from a timer, or pass `on_events` to be called on the
reader thread. On a read error the port is closed at once, `disconnected` is reported, and the
link retries with backoff until the same port is back (a device path that reappears, or the same
USB VID/PID/serial number under a new name, or the URL opening again), then reports
`reconnected`. The decoder and its statistics carry on across the gap.
"""

from __future__ import annotations

import logging
import os
import queue
import threading
import time
from collections.abc import Callable

import serial

from protocol.decoder import Decoder
from protocol.encoder import REQUEST_INFO
from protocol.errors import UserError
from protocol.eventbuffer import EventBuffer
from protocol.events import BoardInfo, Event, LinkState, LinkStats, LinkStatus
from protocol.framing import MAX_LINE_BYTES
from protocol.linkwatch import LinkWatch
from protocol.opening import has_baud_rate, is_url, open_port, scheme_of
from protocol.ports import UsbIdentity, find_usb, usb_identity

__all__ = ["Link", "open_port"]

log = logging.getLogger("padtune.link")
Opener = Callable[[str, int, float], serial.SerialBase]
_READ_ERRORS = (serial.SerialException, OSError, TypeError, AttributeError)
VANISH_CHECK_S = 0.5
BULK_READ_BYTES = 1 << 16


class Link:
    """A live connection to one board. `start()` opens the port (UserError if it cannot)."""

    def __init__(
        self,
        port: str,
        baud: int = 115200,
        *,
        clock: Callable[[], float] = time.monotonic,
        max_queued_events: int = 10_000,
        max_queued_frames: int = 20_000,
        reconnect: bool = True,
        on_events: Callable[[list[Event]], None] | None = None,
        opener: Opener = open_port,
        read_timeout_s: float = 0.05,
        backoff_s: tuple[float, float] = (0.1, 2.0),
        max_line_bytes: int = MAX_LINE_BYTES,
    ) -> None:
        self.port = port
        self.baud = baud
        self.clock = clock
        self.reconnect = reconnect
        self.on_events = on_events
        self.read_timeout_s = read_timeout_s
        self.backoff_s = backoff_s
        self.last_error = ""
        self.device = port  # what is open now (a USB board may come back under another name)
        self._opener = opener
        self._decoder = Decoder(max_line_bytes)
        self._buffer = EventBuffer(max_queued_frames, max_queued_events)
        self._lock = threading.Lock()  # decoder and statistics
        self._write_lock = threading.Lock()
        self._outbox: queue.SimpleQueue[bytes | None] = queue.SimpleQueue()
        self._writer: threading.Thread | None = None
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None
        self._serial: serial.SerialBase | None = None
        self._state = LinkState.CONNECTING
        self._identity: UsbIdentity | None = None
        # loop:// only echoes what is written: asking it for an info line would read back a stray `?`.
        self._watch = LinkWatch(port, baud, has_baud=has_baud_rate(port), ask=scheme_of(port) != "loop")
        self._callback_errors = 0
        self._greedy = scheme_of(port) == "socket"
        # A POSIX device path can be watched for disappearing; COM3 and URLs are simply reopened.
        self._is_path = os.name == "posix" and not is_url(port)

    # -- public ------------------------------------------------------------------------------------
    @property
    def state(self) -> LinkState:
        return self._state

    @property
    def connected(self) -> bool:
        return self._state in (LinkState.CONNECTED, LinkState.RECONNECTED)

    @property
    def baud_suspect(self) -> bool:
        """True when most bytes in the first 2 s after (re)opening were not text: wrong baud rate?
        (Never on socket:// or loop://, which have no baud rate: they get an `unreadable` fault.)"""
        return self._watch.baud_suspect

    @property
    def baud_checked(self) -> bool:
        """True once the wrong-baud check of the current opening has reached its verdict."""
        return self._watch.baud_checked

    @property
    def running(self) -> bool:
        """True while the reader thread runs (it ends on stop(), or on a loss without reconnect)."""
        return self._thread is not None and self._thread.is_alive()

    @property
    def queued_frames(self) -> int:
        """Frames waiting for drain() (never more than max_queued_frames)."""
        return self._buffer.queued_frames

    @property
    def info(self) -> BoardInfo | None:
        """The session's info as the board last described itself (merged info lines), or None."""
        return self._decoder.info

    @property
    def channels(self) -> int | None:
        return self._decoder.channels

    @property
    def stats(self) -> LinkStats:
        with self._lock:
            snap = self._decoder.stats.snapshot()
        snap.overflow = self._buffer.dropped_frames
        if self._buffer.dropped_events:
            snap.extra["overflow_events"] = self._buffer.dropped_events
        if self._buffer.merged_faults:
            snap.extra["merged_faults"] = self._buffer.merged_faults  # their counts are kept
        if self._callback_errors:
            snap.extra["callback_errors"] = self._callback_errors
        snap.extra["stalls"] = self._watch.stalls  # silences of 2 s or more (never spoke, or stalled)
        if self._watch.asked:
            snap.extra["info_requests"] = self._watch.asked  # `?` sent because no info line came
        return snap

    def start(self) -> None:
        if self._thread is not None:
            raise RuntimeError("link already started")
        self._serial = self._opener(self.port, self.baud, self.read_timeout_s)
        if self._is_path:
            self._identity = self._lookup_identity()
        self._opened(LinkState.CONNECTED, "")
        self._thread = threading.Thread(target=self._run, name=f"padtune-link {self.port}", daemon=True)
        self._thread.start()

    def stop(self, timeout_s: float = 3.0) -> None:
        """Stop reading, close the port, report `closed`. Safe to call more than once."""
        self._stop.set()
        ser = self._serial
        if ser is not None and hasattr(ser, "cancel_read"):
            try:
                ser.cancel_read()
            except _READ_ERRORS as exc:
                log.debug("cancel_read on %s: %s", self.port, exc)
        if self._thread is not None and self._thread is not threading.current_thread():
            self._thread.join(timeout_s)
        if self._writer is not None:
            self._outbox.put(None)
            self._writer.join(timeout_s)
        self._close()
        if self._state is not LinkState.CLOSED:
            self._state = LinkState.CLOSED
            self._deliver([LinkStatus(self.clock(), LinkState.CLOSED, self.port)])

    def __enter__(self) -> Link:
        self.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self.stop()

    def drain(self, max_events: int | None = None) -> list[Event]:
        """Everything queued since the last call (or the first `max_events`), in stream order."""
        return self._buffer.drain(max_events)

    def write(self, data: bytes) -> bool:
        """Send bytes to the board; False (reason in `last_error`) when the port is not open now."""
        with self._write_lock:
            ser = self._serial
            if ser is None:
                self.last_error = f"{self.port} is not connected"
                return False
            try:
                ser.write(data)
                return True
            except _READ_ERRORS as exc:
                self.last_error = f"write to {self.port} failed: {exc}"
                log.info("%s", self.last_error)
                return False

    def post(self, data: bytes) -> bool:
        """Send bytes from the link's writer thread, never waiting for the port: for a UI thread.

        False (reason in `last_error`) when the port is not open now; a write that fails later is
        logged and kept in `last_error` (a command sent so gets no answer and times out).
        """
        if self._serial is None or self._stop.is_set():
            self.last_error = f"{self.port} is not connected"
            return False
        if self._writer is None:
            self._writer = threading.Thread(target=self._write_loop, name=f"padtune-writer {self.port}",
                                            daemon=True)
            self._writer.start()
        self._outbox.put(data)
        return True

    def _write_loop(self) -> None:
        while True:
            data = self._outbox.get()
            if data is None:
                return
            self.write(data)

    def request_info(self) -> bool:
        """Ask the board to send its info line again (`?`); boards may ignore it."""
        return self.write(REQUEST_INFO)

    # -- reader thread -----------------------------------------------------------------------------
    def _run(self) -> None:
        try:
            while not self._stop.is_set():
                if self._serial is None:
                    if not self.reconnect or not self._reconnect():
                        return
                else:
                    self._read_once()
        except Exception as exc:  # a bug, not a cable: report it in the stream, never die silently
            log.exception("link reader for %s failed", self.port)
            self.last_error = f"reader failed: {exc!r}"
            self._close()
            self._state = LinkState.DISCONNECTED
            self._deliver([LinkStatus(self.clock(), LinkState.DISCONNECTED, self.port, self.last_error)])

    def _read_once(self) -> None:
        ser = self._serial
        assert ser is not None
        try:
            data = ser.read(ser.in_waiting or 1)
            if data and self._greedy:
                data += self._read_more(ser)
        except _READ_ERRORS as exc:
            if not self._stop.is_set():
                self._lost(f"read failed: {exc}")
            return
        now = self.clock()
        events: list[Event] = []
        with self._lock:
            if data:
                events = self._decoder.feed(data, now)
            step = self._watch.feed(data, now, self._decoder.stats, self._decoder.first_unreadable)
        if not data and self._vanished(now):
            self._lost(f"{self.device} vanished")
            return
        for fault in step.faults:  # delivered as events: the front end tells the user, not the log
            log.info("%s: %s", self.port, fault.detail)
        events += step.faults
        if events:
            self._deliver(events)
        if step.ask and not self.request_info():
            log.info("asking %s for its info line failed: %s", self.port, self.last_error)

    def _read_more(self, ser: serial.SerialBase) -> bytes:
        """For socket://, whose in_waiting only says "something": take what is there without waiting."""
        old = ser.timeout
        ser.timeout = 0
        try:
            return ser.read(BULK_READ_BYTES)
        finally:
            ser.timeout = old

    _last_vanish_check = 0.0

    def _vanished(self, now: float) -> bool:
        if not self._is_path or now - self._last_vanish_check < VANISH_CHECK_S:
            return False
        self._last_vanish_check = now
        return not os.path.exists(self.device)

    def _lost(self, reason: str) -> None:
        """The port failed: close it at once (a held descriptor makes the board come back renamed)."""
        self._close()
        self.last_error = reason
        with self._lock:
            self._decoder.drop_partial()
        self._state = LinkState.DISCONNECTED
        log.info("%s disconnected: %s", self.port, reason)
        self._deliver([LinkStatus(self.clock(), LinkState.DISCONNECTED, self.port, reason)])

    def _reconnect(self) -> bool:
        """Retry with backoff until the port is back (True) or the link is stopped (False)."""
        self._state = LinkState.RECONNECTING
        gone_at = self.clock()
        self._deliver([LinkStatus(gone_at, LinkState.RECONNECTING, self.port, self.last_error)])
        delay, most = self.backoff_s
        while not self._stop.wait(delay):
            target = self._find_target()
            if target is not None:
                try:
                    ser = self._opener(target, self.baud, self.read_timeout_s)
                except UserError as exc:
                    self.last_error = str(exc)
                else:
                    with self._write_lock:
                        self._serial = ser
                    self.device = target
                    moved = "" if target == self.port else f"now at {target}; "
                    self._opened(LinkState.RECONNECTED, f"{moved}away {self.clock() - gone_at:.1f} s")
                    return True
            delay = min(delay * 2, most)
        return False

    def _find_target(self) -> str | None:
        if not self._is_path or os.path.exists(self.port):
            return self.port
        if self._identity is None:
            return None
        try:
            return find_usb(self._identity)
        except Exception as exc:  # list_ports can fail on odd systems; keep waiting for the path
            self.last_error = f"listing ports failed: {exc}"
            return None

    def _lookup_identity(self) -> UsbIdentity | None:
        try:
            return usb_identity(self.port)
        except Exception as exc:  # without it the link still waits for the same path to reappear
            log.info("no USB identity for %s: %s", self.port, exc)
            return None

    def _opened(self, state: LinkState, detail: str) -> None:
        now = self.clock()
        self._state = state
        self._last_vanish_check = now
        with self._lock:
            self._decoder.clear_unreadable()  # the diagnosis quotes a line of this opening
            self._watch.opened(now, self._decoder.stats)
        self._deliver([LinkStatus(now, state, self.port, detail)])

    def _close(self) -> None:
        with self._write_lock:
            ser, self._serial = self._serial, None
        if ser is None:
            return
        try:
            ser.close()
        except _READ_ERRORS as exc:
            log.info("closing %s: %s", self.port, exc)

    def _deliver(self, events: list[Event]) -> None:
        if self.on_events is None:
            self._buffer.put(events)
            return
        try:
            self.on_events(events)
        except Exception:  # the consumer's bug must not kill the reader; it is logged and counted
            self._callback_errors += 1
            log.exception("on_events callback for %s failed", self.port)
