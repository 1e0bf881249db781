"""Issue 9, item 4, the reconnect half: a board that keeps running while its cable is pulled and put back
(the port reopens; the board does not restart, so it prints no info line) is asked `?` again.

The board sits behind a stable symlink (`tests/protocol/ptyboard.PtyBoard`, as /dev/serial/by-id/...
does) and speaks protocol v1 with checksums; it answers `?` with its info line without `proto`.
"""

from __future__ import annotations

import os
import select
import signal
import subprocess
import threading
import time

import pytest

from tests.acceptance.boards import crc_line
from tests.acceptance.runs import ROOT, padtune_cmd
from tests.protocol.ptyboard import PtyBoard

pytestmark = pytest.mark.e2e
WAIT_S = 30.0
ASK_WAIT_S = 5.0  # 0.5 s by the contract; the rest is room for a loaded machine
ANSWER = crc_line("! board=lab3 channels=2 rate=100 names=left,right polarity=-") + "\r\n"


class RunningBoard(threading.Thread):
    """Prints `@seq 2048 2101*CRC` at 100 Hz while plugged in, answers `?`; counts the `?` it hears."""

    def __init__(self, pty: PtyBoard) -> None:
        super().__init__(daemon=True)
        self.pty = pty
        self.plugged = threading.Event()
        self.plugged.set()
        self.halt = threading.Event()
        self.asks: list[float] = []
        self.seq = 0

    def run(self) -> None:
        heard = b""
        while not self.halt.is_set():
            time.sleep(0.01)
            if not self.plugged.is_set():
                continue
            master = self.pty.master
            if master is None:
                continue
            try:
                os.set_blocking(master, False)  # a full pty (nobody reading yet) drops lines, never blocks
                ready, _, _ = select.select([master], [], [], 0)
                if ready:
                    heard += os.read(master, 1024)
                while b"\n" in heard:
                    line, heard = heard.split(b"\n", 1)
                    if line.strip() == b"?":
                        self.asks.append(time.monotonic())
                        os.write(master, ANSWER.encode())
                os.write(master, (crc_line(f"@{self.seq % 65536} 2048 2101") + "\r\n").encode())
                self.seq += 1
            except OSError:  # pulled out under us: the next round sees it unplugged
                heard = b""


def _wait(condition, what: str, proc: subprocess.Popen, timeout_s: float = WAIT_S) -> None:
    deadline = time.monotonic() + timeout_s
    while not condition():
        assert proc.poll() is None, f"padtune ended ({proc.returncode}) before {what}"
        assert time.monotonic() < deadline, f"timed out waiting for {what}"
        time.sleep(0.02)


def test_a_reopened_port_is_asked_again(tmp_path):
    pty = PtyBoard(tmp_path)
    board = RunningBoard(pty)
    proc = subprocess.Popen(padtune_cmd("monitor", str(pty.path), "--json"), cwd=ROOT, text=True,
                            stdin=subprocess.DEVNULL, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            env={**os.environ, "NO_COLOR": "1"})
    lines: list[str] = []
    reader = threading.Thread(target=lambda: lines.extend(proc.stdout), daemon=True)
    reader.start()
    board.start()
    try:
        _wait(lambda: any('"event":"connected"' in x for x in lines), "the open", proc)
        _wait(lambda: len(board.asks) >= 1, "the first `?`", proc, ASK_WAIT_S)
        board.plugged.clear()
        pty.unplug()
        _wait(lambda: any('"event":"disconnected"' in x for x in lines), "the unplug", proc)
        pty.plug()
        board.plugged.set()
        _wait(lambda: any('"event":"reconnected"' in x for x in lines), "the reconnect", proc)
        reopened = time.monotonic()
        _wait(lambda: len(board.asks) >= 2, "a `?` after the reconnect", proc, ASK_WAIT_S)
        assert board.asks[1] >= reopened - 0.1
        time.sleep(0.3)
    finally:
        board.halt.set()
        if proc.poll() is None:
            proc.send_signal(signal.SIGTERM)
        try:
            proc.wait(WAIT_S)
        finally:
            if proc.poll() is None:
                proc.kill()
            board.join(5)
            pty.close()
    assert len(board.asks) == 2, board.asks  # once per opening
