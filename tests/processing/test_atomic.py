"""Crash-safe writes never replace something that is not a regular file: a device (`/dev/null`,
`/dev/full`), a pipe or a folder stays what it was, and the writer says what it is in one line."""

from __future__ import annotations

import os
import stat
import subprocess
import sys
from pathlib import Path

import pytest

from processing.atomic import NotRegularFile, atomic_write_bytes
from processing.profile import ProfileError, profile_for, save_profile


@pytest.mark.parametrize("make", ["fifo", "folder", "symlink to fifo"])
def test_a_pipe_or_a_folder_is_refused_and_left_alone(tmp_path: Path, make: str) -> None:
    target = tmp_path / "out.h"
    real = tmp_path / "real"
    if make == "folder":
        target.mkdir()
        real = target
    else:
        os.mkfifo(real if make != "fifo" else target)
        real = target if make == "fifo" else real
        if make == "symlink to fifo":
            target.symlink_to(real)
    with pytest.raises(NotRegularFile, match=r"not a regular file|folder"):
        atomic_write_bytes(target, b"x")
    mode = real.stat().st_mode
    assert stat.S_ISFIFO(mode) or stat.S_ISDIR(mode)
    assert [p.name for p in tmp_path.iterdir() if p.name.endswith(".tmp")] == []  # nothing left behind


@pytest.mark.skipif(not Path("/dev/null").is_char_device(), reason="no /dev/null character device")
def test_a_device_stays_a_device_even_for_root() -> None:
    with pytest.raises(NotRegularFile, match="character device"):
        atomic_write_bytes("/dev/null", b"x")
    with pytest.raises(ProfileError, match="/dev/null: cannot save: it is a character device"):
        save_profile(profile_for(2), Path("/dev/null"))
    assert Path("/dev/null").is_char_device()


def test_export_to_a_device_is_one_line_and_exit_2(tmp_path: Path) -> None:
    profile = tmp_path / "p.toml"
    save_profile(profile_for(2), profile)
    os.mkfifo(tmp_path / "fifo")
    for target in (str(tmp_path / "fifo"), "/dev/full"):
        done = subprocess.run([sys.executable, "-m", "tui.cli", "export", str(profile), "--c-header", target],
                              capture_output=True, text=True, timeout=60, cwd=Path(__file__).parents[2])
        assert done.returncode == 2 and done.stdout == ""
        assert done.stderr.count("\n") == 1 and "not a regular file" in done.stderr, done.stderr
    assert stat.S_ISFIFO((tmp_path / "fifo").stat().st_mode) and Path("/dev/full").is_char_device()
