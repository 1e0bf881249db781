"""Unplug and replug: a board on a pseudo-terminal behind a stable symlink (as /dev/serial/by-id/...),
pulled out and put back 50 times under a running `protocol.link.Link` (the link every front end uses).

The board keeps running while unplugged (it prints no info line when it comes back, so the link must ask
`?` and the board answers with its info line). Per cycle: the time from the replug to the link's
`reconnected` event, the info line recovered after it, frames flowing again; then this process's open file
descriptors (/proc/self/fd) and threads (/proc/self/task), which must be the same after every cycle.
Uses `tests/protocol/ptyboard.PtyBoard` (the pty tests' own stable-path board).
"""

from __future__ import annotations

import random
import statistics
import tempfile
import threading
import time
from pathlib import Path

from protocol.events import BoardInfo, FrameBlock, LinkState, LinkStatus
from protocol.link import Link
from tests.acceptance.boards import crc_line
from tests.protocol.ptyboard import Collector, PtyBoard
from tests.reliability.figures import Figure, at_most, equal, info, open_fds, os_threads, with_note

FULL_CYCLES = 50
QUICK_CYCLES = 4
WAIT_S = 30.0
# The link retries with backoff doubling up to 2 s (protocol.link.Link's default, as monitor runs it):
# a board back in place is reopened within one backoff step; 0.5 s of room for a loaded machine.
RECONNECT_BOUND_S = 2.5
ANSWER = (crc_line("! board=bench channels=2 rate=100 names=left,right polarity=-") + "\r\n").encode()


class Board(threading.Thread):
    """Prints `@seq 2048 2101*CRC` every 10 ms while plugged in and answers `?` with its info line."""

    def __init__(self, pty: PtyBoard) -> None:
        super().__init__(daemon=True)
        self.pty = pty
        self.lock = threading.Lock()  # plug/unplug vs writes: never write to a closed (reused) descriptor
        self.halt = threading.Event()
        self.seq = 0

    def run(self) -> None:
        import os
        import select

        heard = b""
        while not self.halt.wait(0.01):
            with self.lock:
                master = self.pty.master
                if master is None:
                    heard = b""
                    continue
                try:
                    os.set_blocking(master, False)
                    if select.select([master], [], [], 0)[0]:
                        heard += os.read(master, 1024)
                    out = b""
                    while b"\n" in heard:
                        line, heard = heard.split(b"\n", 1)
                        if line.strip() == b"?":
                            out += ANSWER
                    out += (crc_line(f"@{self.seq % 65536} 2048 2101") + "\r\n").encode()
                    self.seq += 1
                    os.write(master, out)
                except OSError:  # the pty's buffer is full before the link reads: a board drops lines
                    pass

    def unplug(self) -> None:
        with self.lock:
            self.pty.unplug()

    def plug(self) -> None:
        with self.lock:
            self.pty.plug()


def _since(got: Collector, start: int, kind) -> list:
    return [e for e in got.events[start:] if isinstance(e, kind)]


def _status_after(got: Collector, start: int, state: LinkState) -> LinkStatus | None:
    return next((e for e in _since(got, start, LinkStatus) if e.state == state), None)


def run(quick: bool) -> list[Figure]:
    cycles = QUICK_CYCLES if quick else FULL_CYCLES
    rng = random.Random(3)
    times, fds, threads, infos, problems = [], [], [], 0, []
    with tempfile.TemporaryDirectory(prefix="padtune-replug-") as tmp:
        pty = PtyBoard(Path(tmp))
        board = Board(pty)
        board.start()
        link = Link(str(pty.path), 115200)
        link.start()
        got = Collector(link)
        try:
            got.wait(lambda: any(isinstance(e, BoardInfo) for e in got.events), "the first info line", WAIT_S)
            for cycle in range(cycles):
                time.sleep(rng.uniform(0.05, 0.3))  # frames flow a while
                mark = len(got.events)
                board.unplug()
                got.wait(lambda m=mark: _status_after(got, m, LinkState.DISCONNECTED) is not None,
                         "the unplug", WAIT_S)
                time.sleep(rng.uniform(0.0, 0.4))  # out for a moment
                mark = len(got.events)
                plugged_at = time.monotonic()
                board.plug()
                got.wait(lambda m=mark: _status_after(got, m, LinkState.RECONNECTED) is not None,
                         "the reconnect", WAIT_S)
                back = _status_after(got, mark, LinkState.RECONNECTED)
                times.append(back.t_s - plugged_at)
                try:
                    got.wait(lambda m=mark: _since(got, m, BoardInfo) and _since(got, m, FrameBlock),
                             "the info line and frames after the reconnect", WAIT_S / 3)
                    infos += 1
                except AssertionError:
                    problems.append(f"cycle {cycle}: no info line after the reconnect")
                fds.append(open_fds())
                threads.append(os_threads())
                got.events = got.events[-200:]  # what the checks look back on; keeps this run's memory flat
        except AssertionError as exc:
            problems.append(f"cycle {len(times)}: {str(exc)[:300]}")
        finally:
            link.stop()
            board.halt.set()
            board.join(5)
            if pty.master is not None:
                pty.close()
    done = len(times)
    figures = [
        info("replug: cycles", cycles),
        equal("replug: cycles reconnected", done, cycles),
        equal("replug: info line recovered", infos, cycles),
        at_most("replug: reconnect time, max", round(max(times), 3) if times else float("inf"),
                RECONNECT_BOUND_S, "s", timed=True),
        info("replug: reconnect time, median", round(statistics.median(times), 3) if times else "none", "s"),
        equal("replug: open descriptors, spread over cycles", max(fds) - min(fds) if fds else -1, 0),
        equal("replug: threads, spread over cycles", max(threads) - min(threads) if threads else -1, 0),
        info("replug: open descriptors / threads", f"{fds[-1]}/{threads[-1]}" if fds else "none"),
    ]
    return with_note(figures, problems[0] if problems else "")
