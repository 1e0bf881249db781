"""Issue 13: `padtune sim --link L` after a kill -9 of the server that made L (the link dangles), and what
--link refuses: a regular file, a folder, a link to something else, a live link of a running server, `-`.

Real subprocesses; the board behind the link is read through pyserial as a client would.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
import serial

from tests.headless.helpers import ROOT, padtune

pytestmark = pytest.mark.e2e
WAIT_S = 30.0


def start_sim(link: Path) -> tuple[subprocess.Popen, str]:
    proc = subprocess.Popen([sys.executable, "-m", "tui.cli", "sim", "greenhouse", "--link", str(link)],
                            cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    assert proc.stdout is not None
    first = proc.stdout.readline().strip()  # the device path, alone on the first line
    assert first.startswith("/dev/"), (first, proc.stderr.read() if proc.poll() is not None else "")
    deadline = time.monotonic() + WAIT_S
    while not (link.is_symlink() and os.readlink(link) == first):
        assert time.monotonic() < deadline, "the link was not made"
        time.sleep(0.01)
    return proc, first


def read_info_line(link: Path) -> bytes:
    """Open the board at the link with pyserial and wait for its info line (sent on connect)."""
    with serial.Serial(str(link), 115200, timeout=0.2) as port:
        got = b""
        deadline = time.monotonic() + WAIT_S
        while b"! proto=1" not in got:
            assert time.monotonic() < deadline, got[-200:]
            got += port.read(4096)
    return got


def stop(proc: subprocess.Popen) -> None:
    if proc.poll() is None:
        proc.send_signal(signal.SIGTERM)
    try:
        proc.wait(WAIT_S)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()


def test_sim_starts_again_at_its_link_after_a_kill_9(tmp_path):
    link = tmp_path / "board"
    first, _ = start_sim(link)
    first.send_signal(signal.SIGKILL)
    first.wait(WAIT_S)
    assert link.is_symlink() and not link.exists()  # dangling: its pty went with the server
    second, device = start_sim(link)  # before: "--link ... already exists", exit 2
    try:
        assert b"board=greenhouse" in read_info_line(link)
        assert os.readlink(link) == device
    finally:
        stop(second)
    assert not os.path.lexists(link)  # removed on a clean stop, as before


def test_a_live_link_is_refused_by_name_and_left_to_its_server(tmp_path):
    link = tmp_path / "board"
    running, device = start_sim(link)
    try:
        out = padtune("sim", "greenhouse", "--link", str(link), "--duration", "1")
        assert out.returncode == 2 and out.stdout == ""
        said = f"padtune: --link {link} points to {device}, a pseudo-terminal in use (another padtune sim?); "
        assert out.stderr.splitlines() == [said + "stop that server or pick another path"]
        assert os.readlink(link) == device and b"board=greenhouse" in read_info_line(link)
    finally:
        stop(running)


@pytest.mark.parametrize(("make", "says"), [
    (lambda p: p.write_text("keep me"), "already exists and is a file, not a link"),
    (lambda p: p.mkdir(), "already exists and is a folder, not a link"),
    (lambda p: p.symlink_to("/etc/hostname"), "is a link to /etc/hostname, not to a padtune sim"),
])
def test_a_file_folder_or_foreign_link_at_the_path_is_refused_and_kept(tmp_path, make, says):
    link = tmp_path / "board"
    make(link)
    before = (link.is_symlink(), os.readlink(link) if link.is_symlink() else None,
              link.read_bytes() if link.is_file() and not link.is_symlink() else None)
    out = padtune("sim", "greenhouse", "--link", str(link), "--duration", "1")
    assert out.returncode == 2 and out.stdout == "", out.stderr
    assert out.stderr.startswith(f"padtune: --link {link} ") and says in out.stderr
    assert out.stderr.count("\n") == 1
    after = (link.is_symlink(), os.readlink(link) if link.is_symlink() else None,
             link.read_bytes() if link.is_file() and not link.is_symlink() else None)
    assert after == before


def test_dash_is_refused_for_link_and_flash_and_help_says_so(tmp_path):
    for option in ("--link", "--flash"):
        out = subprocess.run([sys.executable, "-m", "tui.cli", "sim", "greenhouse", option, "-", "--duration",
                              "1"], cwd=tmp_path, env={**os.environ, "PYTHONPATH": str(ROOT)},
                             capture_output=True, text=True, timeout=120)
        assert out.returncode == 2 and out.stderr.startswith(f"padtune: {option} -: "), out.stderr
        assert list(tmp_path.iterdir()) == []
    helptext = padtune("sim", "--help").stdout
    assert "`-` is refused" in " ".join(helptext.split())


def test_a_link_whose_pty_number_another_program_took_again_is_replaced(tmp_path):
    """After the kill the pty number is free, and on a busy machine another program (here this test, as
    a terminal would) may take it before the server starts again: that program serves no link, so the
    link is still the dead server's and is replaced."""
    master, slave = os.openpty()
    try:
        link = tmp_path / "board"
        link.symlink_to(os.ttyname(slave))
        again, device = start_sim(link)
        try:
            assert device != os.ttyname(slave) and b"board=greenhouse" in read_info_line(link)
        finally:
            stop(again)
    finally:
        os.close(master)
        os.close(slave)
