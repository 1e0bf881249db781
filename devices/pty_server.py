"""Serving a simulated board on a pseudo-terminal, so any program can open it like hardware.

The server keeps the master side; a client opens the slave path (`/dev/pts/N`) with any serial
program. While no client has the slave open (the master polls as hung up) the board keeps running
but sends nothing, so a new client starts at a line boundary; on connect the board sends its info
line, as many boards do when the port opens. Writes from the client are the board's host commands.
A client that stops reading loses whole lines once `max_backlog_bytes` pile up (counted).
"""

from __future__ import annotations

import contextlib
import os
import select
import time
import tty
from collections.abc import Callable
from dataclasses import dataclass

from devices.simulator import SimBoard

PACKET_S = 0.01


@dataclass(slots=True)
class ServeStats:
    connects: int = 0
    bytes_sent: int = 0
    bytes_dropped: int = 0  # whole lines dropped because the client did not read
    commands_bytes: int = 0


class PtyServer:
    def __init__(self, board: SimBoard, max_backlog_bytes: int = 1 << 20) -> None:
        self.board = board
        self.max_backlog_bytes = max_backlog_bytes
        self.master, slave = os.openpty()
        tty.setraw(slave)
        self.path = os.ttyname(slave)
        os.close(slave)  # without our own slave descriptor the master reports whether a client is there
        os.set_blocking(self.master, False)
        self.stats = ServeStats()
        self.connected = False
        self._out = bytearray()
        self._closed = False

    def _client_present(self) -> bool:
        poller = select.poll()
        poller.register(self.master, select.POLLIN)
        events = poller.poll(0)
        return not any(mask & select.POLLHUP for _, mask in events)

    def step(self, on_change: Callable[[bool], None] | None = None) -> float:
        """Do one round of work; return how long the caller may sleep before the next."""
        present = self._client_present()
        if present != self.connected:
            self.connected = present
            self._out.clear()
            if present:
                self.stats.connects += 1
                self.board.generate_until(self.board.sim_time_s)
                self.board.take()  # what was made while nobody listened is gone
                self.board.announce()  # a new client is a new session
            if on_change:
                on_change(present)
        if not present:
            self.board.skip_until(self.board.sim_time_s)
            return 0.05
        self._read_commands()
        self._out += self.board.read_due()
        self._trim()
        self._write()
        # Sleep to the next frame but at least a packet time: a 1 kHz board goes out in 10 ms packets.
        return min(0.05, max(self.board.seconds_to_next_frame(), PACKET_S))

    def _read_commands(self) -> None:
        try:
            data = os.read(self.master, 4096)
        except (BlockingIOError, InterruptedError):
            return
        except OSError:  # EIO: the client closed between our poll and the read
            return
        self.stats.commands_bytes += len(data)
        self.board.write(data)

    def _trim(self) -> None:
        excess = len(self._out) - self.max_backlog_bytes
        if excess > 0:
            cut = self._out.find(b"\n", excess)
            cut = len(self._out) if cut < 0 else cut + 1
            self.stats.bytes_dropped += cut
            del self._out[:cut]

    def _write(self) -> None:
        while self._out:
            try:
                n = os.write(self.master, self._out[:65536])
            except (BlockingIOError, InterruptedError):
                return
            except OSError:
                self._out.clear()
                return
            self.stats.bytes_sent += n
            del self._out[:n]

    def serve(self, stop: Callable[[], bool] = lambda: False,
              on_change: Callable[[bool], None] | None = None) -> None:
        while not stop():
            time.sleep(self.step(on_change))

    def close(self) -> None:
        if not self._closed:
            self._closed = True
            with contextlib.suppress(OSError):
                os.close(self.master)
