"""A thin stand-in for `protocol.link`, used only while that module is not in the tree.

It has the planned API (`open_port`, `Link(port, baud, clock=...)` with `start`, `stop`, `drain`,
`write`, `stats`, `state`) and nothing more: a reader thread reads what is waiting, stamps it with the
clock, decodes it with `protocol.decoder.Decoder` and queues the events (bounded; what is dropped is
counted as an overflow fault). No reconnecting: a read error ends the link with a `disconnected`
status. `tui.headless.ports` prefers the real `protocol.link` whenever it can be imported.
"""

from __future__ import annotations

import threading
import time
from collections import deque
from collections.abc import Callable

import serial

from protocol.decoder import Decoder
from protocol.errors import UserError
from protocol.events import Event, FaultKind, LinkFault, LinkState, LinkStats, LinkStatus

MAX_QUEUED = 10_000


def open_port(port: str, baud: int, timeout_s: float) -> serial.Serial:
    try:
        return serial.serial_for_url(port, baudrate=baud, timeout=timeout_s)
    except UserError:
        raise
    except (serial.SerialException, OSError, ValueError) as exc:
        text = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise UserError(f"cannot open {port}: {text}: check the name (padtune ports lists them), that no "
                        "other program holds it, and your permission (the dialout group on Linux)") from None


class Link:
    def __init__(self, port: str, baud: int = 115200, *, clock: Callable[[], float] = time.monotonic) -> None:
        self.port, self.baud, self.clock = port, baud, clock
        self._decoder = Decoder()
        self._queue: deque[Event] = deque()
        self._lock = threading.Lock()
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None
        self._serial: serial.Serial | None = None
        self.state = LinkState.CONNECTING

    @property
    def stats(self) -> LinkStats:
        with self._lock:
            return self._decoder.stats.snapshot()

    def _put(self, events: list[Event]) -> None:
        with self._lock:
            room = MAX_QUEUED - len(self._queue)
            self._queue.extend(events[:max(0, room)])
            if len(events) > room:
                self._queue.append(LinkFault(self.clock(), FaultKind.OVERFLOW, len(events) - max(0, room)))

    def start(self) -> None:
        self._serial = open_port(self.port, self.baud, 0.05)
        self.state = LinkState.CONNECTED
        self._put([LinkStatus(self.clock(), LinkState.CONNECTED, self.port)])
        self._thread = threading.Thread(target=self._run, name="padtune-link", daemon=True)
        self._thread.start()

    def _run(self) -> None:
        ser = self._serial
        assert ser is not None
        while not self._stop.is_set():
            try:
                data = ser.read(ser.in_waiting or 1)
            except (serial.SerialException, OSError) as exc:
                self.state = LinkState.DISCONNECTED
                self._put([LinkStatus(self.clock(), LinkState.DISCONNECTED, self.port, str(exc))])
                return
            if data:
                now = self.clock()
                with self._lock:
                    events = self._decoder.feed(data, now)
                self._put(events)

    def drain(self, max_events: int | None = None) -> list[Event]:
        with self._lock:
            n = len(self._queue) if max_events is None else min(max_events, len(self._queue))
            return [self._queue.popleft() for _ in range(n)]

    def write(self, data: bytes) -> None:
        if self._serial is not None:
            self._serial.write(data)

    def stop(self) -> None:
        self._stop.set()
        if self._thread is not None:
            self._thread.join(2.0)
        if self._serial is not None:
            self._serial.close()
            self._serial = None
        if self.state != LinkState.CLOSED:
            self.state = LinkState.CLOSED
            self._put([LinkStatus(self.clock(), LinkState.CLOSED, self.port)])
