"""A board that is already running when padtune opens its port, for end-to-end tests.

It streams sequenced frames at `rate_hz` from its own thread whether anyone listens or not (what does
not fit is lost, as from a UART nobody reads), reads what the host sends, and answers `?` with
`answer` (an info line without `proto`) when given one. Its touch script is timed from the host's `?`:
the host asks 0.5 s after opening without an info line, which is when the board knows it is read.
After the script it prints `# end of script` and stops, so a test can wait for that note and then
knows every frame it sent before was read (`first_seq_read` from the frames the host counted).
"""

from __future__ import annotations

import contextlib
import fcntl
import os
import threading
import time
from collections.abc import Callable

import numpy as np

from protocol.encoder import encode_frames

END_NOTE = b"# end of script\n"


class RunningBoard:
    def __init__(self, out: Callable[[bytes], None], inp: Callable[[], bytes], *, channels: int = 2,
                 rate_hz: float = 100.0, base_counts: int = 30000, noise_counts: int = 2,
                 answer: bytes | None = None, touch: tuple[int, int] | None = None, quiet_s: float = 2.5,
                 hold_s: float = 0.6, tail_s: float = 0.6, seed: int = 7) -> None:
        self.out, self.inp = out, inp
        self.channels, self.rate_hz, self.base, self.noise = channels, rate_hz, base_counts, noise_counts
        self.answer, self.touch = answer, touch
        self.quiet_frames, self.hold_frames = round(quiet_s * rate_hz), round(hold_s * rate_hz)
        self.tail_frames = round(tail_s * rate_hz)
        self.rng = np.random.default_rng(seed)
        self.seq = 0  # the next frame's sequence number
        self.heard = b""
        self.asked_at_seq: int | None = None
        self.touch_seqs: tuple[int, int] | None = None  # [first touched, first released)
        self.done = threading.Event()
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, name="running board", daemon=True)

    def start(self) -> RunningBoard:
        self._thread.start()
        return self

    def stop(self) -> None:
        self._stop.set()
        self._thread.join(10)

    def first_seq_read(self, frames_counted: int) -> int:
        """The first frame the host read, given how many it counted with none lost (the frames before
        the port opened were flushed by the open and never counted)."""
        return self.seq - frames_counted

    def _run(self) -> None:
        start = time.monotonic()
        sent = 0
        while not self._stop.is_set() and not self.done.is_set():
            self._listen()
            due = int((time.monotonic() - start) * self.rate_hz) - sent
            if due > 0:
                self.out(self._frames(min(due, 50)))
                sent += min(due, 50)
            self._stop.wait(0.01)

    def _listen(self) -> None:
        self.heard += self.inp()
        if self.asked_at_seq is None and b"?\n" in self.heard:
            self.asked_at_seq = self.seq
            if self.answer is not None:
                self.out(self.answer)
            if self.touch is not None:
                first = self.seq + self.quiet_frames
                self.touch_seqs = (first, first + self.hold_frames)

    def _frames(self, n: int) -> bytes:
        seqs = np.arange(self.seq, self.seq + n)
        rows = self.base + self.rng.integers(-self.noise, self.noise + 1, size=(n, self.channels))
        end = None
        if self.touch_seqs is not None:
            channel, delta = self.touch  # type: ignore[misc]
            lo, hi = self.touch_seqs
            rows[(seqs >= lo) & (seqs < hi), channel] += delta
            end = hi + self.tail_frames
        if end is not None and self.seq + n >= end:
            n = end - self.seq
            data = encode_frames(rows[:n], self.seq) + END_NOTE
            self.seq = end
            self.done.set()
            return data
        self.seq += n
        return encode_frames(rows, seqs[0] % 65536)


class PtyEnd:
    """The board's side of a `tests.protocol.ptyboard.PtyBoard` for a RunningBoard: what does not fit
    in the pty is lost, and reading never waits."""

    def __init__(self, board) -> None:
        self.master = board.master
        flags = fcntl.fcntl(self.master, fcntl.F_GETFL)
        fcntl.fcntl(self.master, fcntl.F_SETFL, flags | os.O_NONBLOCK)

    def out(self, data: bytes) -> None:
        with contextlib.suppress(BlockingIOError, OSError):
            os.write(self.master, data)

    def inp(self) -> bytes:
        try:
            return os.read(self.master, 4096)
        except (BlockingIOError, OSError):
            return b""
