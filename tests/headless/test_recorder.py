"""The recording's writer thread (`tui.recorder.Recorder`): the caller never waits for the disk.

A slow disk is a writer whose writes wait on an event the test holds (no sleeping, no timing); a full
disk is Linux's `/dev/full`, whose every write fails with ENOSPC (full(4)), put under the writer's file
descriptor with `dup2`. Waits are on conditions with generous deadlines.
"""

from __future__ import annotations

import errno
import os
import time
from pathlib import Path

import numpy as np
import pytest

from processing.recording import RecordingWriter, read_recording
from protocol.errors import UserError
from protocol.events import BoardInfo, FrameBlock, Note
from tests.headless.disks import DEADLINE_S, SlowDisk, put_dev_full_under, returns_soon
from tui.recorder import Recorder

INFO = BoardInfo(0.0, {"proto": "1", "channels": "3", "names": "a,b,c"}, proto=1, channels=3,
                 names=("a", "b", "c"), new_session=True)


class Clock:
    def __init__(self) -> None:
        self.t_s = 0.0

    def __call__(self) -> float:
        return self.t_s


def frames(first: int, n: int, channels: int = 3) -> FrameBlock:
    t = (first + np.arange(n)) / 100.0
    return FrameBlock(t, np.arange(first, first + n), np.full((n, channels), 1000 + first, np.int64), first)


def test_rows_and_marks_reach_the_file_in_stream_order(tmp_path: Path) -> None:
    clock = Clock()
    rec = Recorder(tmp_path / "r.csv", clock=clock, origin_t_s=0.0, info=INFO)
    rec.write_events([frames(0, 50)])
    clock.t_s = 0.5
    mark = rec.mark(0.5, "touch-start", "b", "hold b")
    assert mark.t_s == 0.5 and mark.kind == "touch-start"
    rec.write_events([Note(0.6, "hello"), frames(50, 30)])
    rec.close()
    assert rec.finished and rec.frames_written == 80 and rec.marks_written == 1
    back = read_recording(tmp_path / "r.csv")
    assert back.frames == 80 and [m.channel for m in back.marks] == ["b"]
    assert back.info is not None and back.info.names == ("a", "b", "c")
    assert read_recording(tmp_path / "r.csv").arrays()[2][-1, 0] == 1050


def test_an_unknown_mark_kind_is_refused_at_once_and_writes_nothing(tmp_path: Path) -> None:
    rec = Recorder(tmp_path / "r.csv")
    with pytest.raises(UserError, match="unknown mark kind"):
        rec.mark(0.0, "touch-begin")
    rec.close()
    assert rec.marks_written == 0 and rec.error is None


def test_opening_refusals_come_at_once_on_the_callers_thread(tmp_path: Path) -> None:
    (tmp_path / "old.csv").write_text("keep me")
    with pytest.raises(UserError, match="already exists"):
        Recorder(tmp_path / "old.csv")
    assert (tmp_path / "old.csv").read_text() == "keep me"
    with pytest.raises(UserError, match="is a folder"):
        Recorder(tmp_path)


def test_a_slow_disk_never_holds_up_the_caller(tmp_path: Path) -> None:
    clock = Clock()
    rec = Recorder(tmp_path / "slow.csv", clock=clock, flush_interval_s=0.0)
    disk = SlowDisk(rec)
    rec.write_events([frames(0, 10)])
    assert disk.entered.wait(DEADLINE_S)  # the thread is now stuck in a write
    for i in range(1, 20):  # the caller goes on handing rows over while the disk hangs
        returns_soon(lambda i=i: rec.write_events([frames(10 * i, 10)]))
    returns_soon(lambda: rec.mark(0.1, "note", text="while the disk hangs"))
    returns_soon(rec.request_close)
    assert not rec.finished and rec.error is None
    disk.go.set()
    rec.close(DEADLINE_S)
    back = read_recording(tmp_path / "slow.csv")
    assert back.frames == 200 and [m.text for m in back.marks] == ["while the disk hangs"]


def test_close_gives_up_on_a_stuck_disk_and_says_so(tmp_path: Path) -> None:
    rec = Recorder(tmp_path / "stuck.csv", flush_interval_s=0.0)
    disk = SlowDisk(rec)
    rec.write_events([frames(0, 10)])
    assert disk.entered.wait(DEADLINE_S)
    with pytest.raises(UserError, match=r"was not finished within 0\.01 s .*last rows may be missing"):
        rec.close(timeout_s=0.01)  # the disk is held: it cannot finish, however long this waited
    disk.go.set()
    rec.close(DEADLINE_S)  # once the disk moves again, it finishes
    assert read_recording(tmp_path / "stuck.csv").frames == 10


def test_a_disk_that_cannot_keep_up_stops_the_recording_keeping_what_was_queued(tmp_path: Path) -> None:
    rec = Recorder(tmp_path / "behind.csv", flush_interval_s=0.0, max_pending_readings=90)
    disk = SlowDisk(rec)
    rec.write_events([frames(0, 10)])  # 30 readings, taken by the thread, which then hangs
    assert disk.entered.wait(DEADLINE_S)
    returns_soon(lambda: rec.write_events([frames(10, 10)]))  # 30 waiting
    returns_soon(lambda: rec.write_events([frames(20, 10)]))  # 60 waiting
    returns_soon(lambda: rec.write_events([frames(30, 10)]))  # 90: still within the bound
    returns_soon(lambda: rec.write_events([frames(40, 10)]))  # 120 would not be: the recording stops
    assert rec.error is not None and "fell too far behind" in rec.error and not rec.accepting
    returns_soon(lambda: rec.write_events([frames(50, 10)]))  # refused, nothing kept
    disk.go.set()
    with pytest.raises(UserError, match="fell too far behind"):
        rec.close(DEADLINE_S)
    back = read_recording(tmp_path / "behind.csv")
    assert back.frames == 40  # every row handed over before the limit
    assert back.arrays()[1].tolist() == list(range(40))


@pytest.mark.skipif(not os.path.exists("/dev/full"), reason="needs Linux /dev/full")
def test_a_full_disk_stops_the_recording_and_keeps_the_rows_written_before(tmp_path: Path) -> None:
    clock = Clock()
    rec = Recorder(tmp_path / "full.csv", clock=clock, flush_interval_s=0.25)
    rec.write_events([frames(0, 20)])
    assert rec.settle(DEADLINE_S)  # buffered: no flush is due yet
    clock.t_s = 0.3
    rec.write_events([frames(20, 5)])  # due: the 25 rows are handed to the OS
    assert rec.settle(DEADLINE_S) and rec.error is None
    put_dev_full_under(rec)
    clock.t_s = 0.6
    returns_soon(lambda: rec.write_events([frames(25, 5)]))  # this flush meets the full disk
    assert rec.settle(DEADLINE_S)
    assert rec.error is not None and "No space left on device" in rec.error
    assert "rows written before this point are kept" in rec.error
    assert not rec.accepting
    rec.write_events([frames(30, 5)])  # after the failure nothing is queued
    assert rec._pending_readings == 0 and not rec._queue
    with pytest.raises(UserError, match="No space left on device"):
        rec.close(DEADLINE_S)
    assert read_recording(tmp_path / "full.csv").frames == 25


@pytest.mark.skipif(not os.path.exists("/dev/full"), reason="needs Linux /dev/full")
def test_a_full_disk_at_close_is_the_close_errors_reason(tmp_path: Path) -> None:
    rec = Recorder(tmp_path / "late.csv", clock=Clock(), flush_interval_s=0.25)
    rec.write_events([frames(0, 20)])  # buffered: the clock has not moved, no flush is due
    assert rec.settle(DEADLINE_S)
    put_dev_full_under(rec)
    with pytest.raises(UserError, match="No space left on device"):
        rec.close(DEADLINE_S)
    assert rec.finished


@pytest.mark.skipif(not os.path.exists("/dev/full"), reason="needs Linux /dev/full")
def test_a_recording_on_a_full_disk_is_refused_at_once(tmp_path: Path, monkeypatch) -> None:
    # The head is written when the file opens (on the caller's thread): a full disk is a refusal there.
    # (/dev/full itself is refused by name as a character device since issue 13.)
    def disk_full(self, data: bytes) -> None:
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(RecordingWriter, "_write_all", disk_full)
    with pytest.raises(UserError, match="No space left on device"):
        Recorder(tmp_path / "full.csv", overwrite=True)


def test_the_writer_flushes_on_its_own_while_nothing_comes(tmp_path: Path) -> None:
    # Rows reach the OS every flush interval even when the caller hands nothing more over (the thread
    # wakes by itself): with the real clock, wait for the last row to appear in the file.
    rec = Recorder(tmp_path / "idle.csv", origin_t_s=0.0, flush_interval_s=0.05)
    rec.write_events([frames(0, 7)])
    deadline = time.monotonic() + DEADLINE_S
    while "\n0.060000,6,1000,1000,1000\n" not in (tmp_path / "idle.csv").read_text():
        assert time.monotonic() < deadline, "the rows never reached the file"
        time.sleep(0.01)
    rec.close()
