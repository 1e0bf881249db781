"""A pseudo-terminal standing in for a board, at a stable path that can be unplugged and replugged.

The link opens `path` (a symlink to the pty's slave side), exactly as it would open
/dev/serial/by-id/...; `unplug()` closes the master (the link's read then fails as on a real
unplug) and removes the link; `plug()` makes a new pty and points the symlink at it.
"""

from __future__ import annotations

import os
import select
import time
import tty
from collections.abc import Callable
from pathlib import Path

from protocol.events import Event, FrameBlock, LinkState, LinkStatus

TIMEOUT_S = 30.0  # generous: the machine running the tests may be loaded


class PtyBoard:
    def __init__(self, folder: Path) -> None:
        self.path = folder / "board"
        self.master: int | None = None
        self._slave: int | None = None
        self.plug()

    def plug(self) -> None:
        self.master, self._slave = os.openpty()
        tty.setraw(self._slave)
        os.symlink(os.ttyname(self._slave), self.path)

    def unplug(self) -> None:
        for fd in (self.master, self._slave):
            if fd is not None:
                os.close(fd)
        self.master = self._slave = None
        self.path.unlink(missing_ok=True)

    def send(self, data: bytes) -> None:
        assert self.master is not None
        view = memoryview(data)
        while view:
            _, ready, _ = select.select([], [self.master], [], TIMEOUT_S)
            assert ready, "the pty would not take more bytes"
            view = view[os.write(self.master, view) :]

    def receive(self, want: bytes, timeout_s: float = TIMEOUT_S) -> bytes:
        got = b""
        deadline = time.monotonic() + timeout_s
        while want not in got and time.monotonic() < deadline:
            ready, _, _ = select.select([self.master], [], [], 0.05)
            if ready:
                got += os.read(self.master, 4096)
        return got

    def close(self) -> None:
        self.unplug()


class Collector:
    """Drains a link into one list and waits for conditions on it (never sleeps as an assertion)."""

    def __init__(self, link) -> None:
        self.link = link
        self.events: list[Event] = []

    def poll(self) -> None:
        self.events += self.link.drain()

    def wait(self, condition: Callable[[], bool], what: str, timeout_s: float = TIMEOUT_S) -> None:
        deadline = time.monotonic() + timeout_s
        while True:
            self.poll()
            if condition():
                return
            assert time.monotonic() < deadline, (
                f"timed out waiting for {what}; {len(self.frames())} frames; {self.link.stats}; "
                f"events: {self.summary()}"
            )
            time.sleep(0.01)

    def states(self) -> list[LinkState]:
        return [e.state for e in self.events if isinstance(e, LinkStatus)]

    def wait_state(self, state: LinkState, count: int = 1) -> None:
        self.wait(lambda: self.states().count(state) >= count, f"{count}x {state}")

    def frames(self) -> list[tuple[int, tuple[int, ...]]]:
        out = []
        for e in self.events:
            if isinstance(e, FrameBlock):
                out += [(int(s), tuple(r)) for s, r in zip(e.seq.tolist(), e.readings.tolist(), strict=True)]
        return out

    def faults(self, kind) -> list:
        return [e for e in self.events if getattr(e, "kind", None) == kind]

    def summary(self) -> str:
        def one(e: Event) -> str:
            if isinstance(e, FrameBlock):
                return f"{len(e)} frames"
            return f"{type(e).__name__}:{getattr(e, 'state', '')}{getattr(e, 'kind', '')}"

        return ", ".join(one(e) for e in self.events[-12:])
