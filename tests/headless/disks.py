"""Disks for the recording tests: a slow one (each write waits on an event the test holds) and a full one
(Linux's `/dev/full`, whose every write fails with ENOSPC, full(4), put under the writer's descriptor).
No sleeping and no timing: waits are on events and conditions with a generous deadline."""

from __future__ import annotations

import os
import threading
from collections.abc import Callable

from tui.recorder import Recorder

DEADLINE_S = 30.0


def returns_soon(call: Callable[[], object]) -> object:
    """Run `call` on a helper thread; fail (instead of hanging the suite) if it waits for the disk."""
    box: list[object] = []
    helper = threading.Thread(target=lambda: box.append(call()), daemon=True)
    helper.start()
    helper.join(DEADLINE_S)
    assert not helper.is_alive(), "the caller's side waited for the slow disk"
    return box[0] if box else None


class SlowDisk:
    """Replaces the writer's low-level write: each write waits until the test lets it through."""

    def __init__(self, recorder: Recorder) -> None:
        self.entered = threading.Event()
        self.go = threading.Event()
        self._real = recorder.writer._write_all
        recorder.writer._write_all = self._write  # type: ignore[method-assign]

    def _write(self, data: bytes) -> None:
        self.entered.set()
        assert self.go.wait(DEADLINE_S), "the test never let the write through"
        self._real(data)


def put_dev_full_under(recorder: Recorder) -> None:
    full = os.open("/dev/full", os.O_WRONLY)
    os.dup2(full, recorder.writer._fd)  # type: ignore[arg-type]
    os.close(full)
