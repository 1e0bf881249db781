"""A recording that cannot be written (a full disk) or read (a device) ends in one clear line.

`/dev/full` is the Linux device whose every write fails with ENOSPC (documented in full(4)), the
standard stand-in for a full disk.
"""

import errno
import os
import subprocess
import sys

import numpy as np
import pytest

from processing.recording import RecordingWriter
from protocol.errors import UserError
from protocol.events import FrameBlock

pytestmark = pytest.mark.skipif(not os.path.exists("/dev/full"), reason="needs Linux /dev/full")


def _block(n: int, channels: int = 3) -> FrameBlock:
    return FrameBlock(
        t_s=np.arange(n, dtype=np.float64) * 0.01,
        seq=np.arange(n, dtype=np.int64),
        readings=np.full((n, channels), 1000, dtype=np.int64),
        first_index=0,
    )


def _disk_full(self, data: bytes) -> None:
    raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))


def test_writer_turns_a_full_disk_into_a_user_error(tmp_path, monkeypatch):
    # The header is written at once, so the very first write already meets the full disk. (/dev/full
    # itself is no longer written into: a character device is refused by name, issue 13.)
    monkeypatch.setattr(RecordingWriter, "_write_all", _disk_full)
    with pytest.raises(UserError, match="No space left on device"):
        RecordingWriter(tmp_path / "r.csv", overwrite=True)


def test_writer_refuses_dev_full_by_name():
    with pytest.raises(UserError, match="/dev/full: it is a character device, not a regular file"):
        RecordingWriter("/dev/full", overwrite=True)


def test_writer_stops_buffering_after_a_failed_write(tmp_path):
    writer = RecordingWriter(tmp_path / "r.csv", flush_interval_s=0.0)
    os.close(writer._fd)  # the drive vanishes under the writer: every later write fails
    writer._fd = os.open("/dev/full", os.O_WRONLY)
    with pytest.raises(UserError, match="No space left on device"):
        writer.write_events([_block(10)])
    assert writer.closed
    writer.write_events([_block(10)])  # after the failure nothing is kept in memory
    assert writer._buffer == []
    writer.close()
    assert (tmp_path / "r.csv").read_text().startswith("# padtune recording")


@pytest.mark.parametrize("command", [
    ["record", "sim://greenhouse?speed=8&seed=3", "-o", "/dev/full", "--force", "--duration", "3"],
    ["monitor", "sim://greenhouse?speed=8&seed=3", "--duration", "3", "--record", "/dev/full", "--force",
     "--json"],
])
def test_a_recording_on_dev_full_is_refused_by_name_in_one_line(command):
    # Issue 13: a character device at the name is refused before anything is written (a full disk met
    # while writing is the mid-run test below).
    out = subprocess.run([sys.executable, "-m", "tui.cli", *command], capture_output=True, text=True,
                         timeout=120)
    assert out.returncode == 2, out.stderr
    lines = out.stderr.strip().splitlines()
    said = "/dev/full: it is a character device, not a regular file"
    assert len(lines) == 1 and said in lines[0], out.stderr
    assert "Traceback" not in out.stderr and out.stdout == ""


@pytest.mark.parametrize("command", ["monitor", "record"])
def test_a_disk_that_fills_up_mid_run_ends_the_command_with_one_line(command, tmp_path, monkeypatch, capsys):
    # In-process, so the disk can fill up after the head is written: every later write fails as a
    # full disk's does (ENOSPC), on the recording's writer thread.
    import errno

    from tui import cli

    real = RecordingWriter._write_all
    writes = []

    def filling(self, data):
        writes.append(len(data))
        if len(writes) > 1:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        real(self, data)

    monkeypatch.setattr(RecordingWriter, "_write_all", filling)
    target = tmp_path / "run.csv"
    port = "sim://greenhouse?speed=8&seed=3"
    args = (["monitor", port, "--json", "--record", str(target)] if command == "monitor"
            else ["record", port, "-o", str(target)])
    assert cli.main([*args, "--duration", "30"]) == 2  # ends at the failure, long before 30 s
    err = capsys.readouterr().err.strip().splitlines()  # monitor's notices come first, on stderr too
    told = [line for line in err if "No space left on device" in line]
    assert told == [err[-1]] and "rows written before" in err[-1] and "Traceback" not in "".join(err)
    assert target.read_text().startswith("# padtune recording v1")  # the head stays readable


def test_replay_refuses_a_device_that_never_ends():
    out = subprocess.run([sys.executable, "-m", "tui.cli", "replay", "/dev/zero"],
                         capture_output=True, text=True, timeout=60)
    assert out.returncode == 2 and "not a regular file" in out.stderr and out.stderr.count("\n") == 1
