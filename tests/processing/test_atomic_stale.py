"""Issue 13: a save killed between the backup link and the final rename leaves `.NAME.PID.bak.tmp`; the
next save of that target removes it, and removes nothing that belongs to a live writer or another target.

The kill is a real SIGKILL of a padtune process at that very point (its `os.replace` of the backup
temporary), the next save is `padtune tune -o` as a user runs it.
"""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

import pytest

from processing.atomic import atomic_write_bytes
from processing.profile import load_profile
from tests.headless.helpers import ROOT, padtune, sim_capture, write_recording

# A padtune that kills itself with SIGKILL the moment the backup temporary is about to be renamed.
KILL_AT_BACKUP_RENAME = """
import os, signal, sys
import processing.atomic as atomic
real = os.replace
def replace(src, dst):
    if str(src).endswith(".bak.tmp"):
        os.kill(os.getpid(), signal.SIGKILL)
    return real(src, dst)
atomic.os.replace = replace
from tui.cli import main
sys.exit(main(sys.argv[1:]))
"""


def leftovers(folder: Path, name: str) -> list[str]:
    return sorted(p.name for p in folder.iterdir()
                  if p.name.startswith(f".{name}.") and p.name.endswith(".tmp"))


def state(pid: int) -> str:
    return Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]


def wait_zombie(proc: subprocess.Popen) -> None:
    deadline = time.monotonic() + 60
    while state(proc.pid) != "Z":
        assert time.monotonic() < deadline, "the process did not end"
        time.sleep(0.01)


def dead_pid() -> int:
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait()
    return proc.pid


@pytest.mark.e2e
def test_a_kill_between_backup_link_and_rename_is_cleaned_by_the_next_save(tmp_path):
    _, data = sim_capture(6.0)
    rec = tmp_path / "run.csv"
    write_recording(rec, data)
    out = padtune("tune", str(rec), "-o", str(tmp_path / "p.toml"), "--partial")
    assert out.returncode == 0, out.stderr
    first = (tmp_path / "p.toml").read_bytes()
    # Killed at the backup's rename and, as a supervisor that has not reaped it yet sees it, a zombie.
    killed = subprocess.Popen([sys.executable, "-c", KILL_AT_BACKUP_RENAME, "tune", str(rec), "-o",
                               str(tmp_path / "p.toml"), "--partial"], cwd=ROOT, stdout=subprocess.DEVNULL,
                              stderr=subprocess.DEVNULL)
    try:
        wait_zombie(killed)
        left = leftovers(tmp_path, "p.toml")
        assert any(n.endswith(".bak.tmp") for n in left), left  # the kill came where the issue says
        assert (tmp_path / "p.toml").read_bytes() == first  # the old content is whole
        again = padtune("tune", str(rec), "-o", str(tmp_path / "p.toml"), "--partial")
    finally:
        assert killed.wait(60) == -9
    assert again.returncode == 0, again.stderr
    assert leftovers(tmp_path, "p.toml") == []
    load_profile(tmp_path / "p.toml")
    assert (tmp_path / "p.toml.bak").read_bytes() == first


def test_stale_temporaries_of_dead_zombie_and_reused_ids_go_and_live_ones_stay(tmp_path):
    target = tmp_path / "p.toml"
    atomic_write_bytes(target, b"one")
    dead = dead_pid()
    zombie = subprocess.Popen([sys.executable, "-c", "pass"])  # exits, not reaped until the end
    wait_zombie(zombie)
    live = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])
    try:
        stale = [f".p.toml.{dead}.bak.tmp", f".p.toml.{dead}.ab_cd123.tmp", f".p.toml.{zombie.pid}.bak.tmp",
                 ".p.toml.99999999999999999999.bak.tmp"]
        reused = f".p.toml.{live.pid}.zz_zz999.tmp"  # written long before the live process started
        kept = [f".p.toml.{live.pid}.bak.tmp",  # a live writer's, just written
                f".p.toml.5.{dead}.bak.tmp",  # target p.toml.5's leftover
                f".p.toml.{dead}.bak.tmp.tmp", ".p.toml.x.bak.tmp", f".q.toml.{dead}.bak.tmp"]
        for name in [*stale, reused, *kept]:
            (tmp_path / name).write_bytes(b"old")
        os.utime(tmp_path / reused, (time.time() - 3600, time.time() - 3600))
        atomic_write_bytes(target, b"two")
        assert sorted(leftovers(tmp_path, "p.toml")) == sorted(n for n in kept if n.startswith(".p.toml."))
        assert (tmp_path / f".q.toml.{dead}.bak.tmp").exists() and target.read_bytes() == b"two"
    finally:
        live.kill()
        live.wait()
        zombie.wait()


def test_a_target_named_like_a_pattern_sweeps_only_its_own(tmp_path):
    dead = dead_pid()
    other = tmp_path / f".ab.{dead}.bak.tmp"
    other.write_bytes(b"not mine")
    mine = tmp_path / f".a*.{dead}.bak.tmp"
    mine.write_bytes(b"mine")
    atomic_write_bytes(tmp_path / "a*", b"x")
    assert other.exists() and not mine.exists()
