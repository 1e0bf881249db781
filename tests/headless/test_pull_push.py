"""`padtune pull` and `padtune push` as a user runs them: subprocesses against sim:// boards, a sim
served on a real pseudo-terminal (`padtune sim --link`), and a board that lies about what it applied."""

from __future__ import annotations

import os
import subprocess
import sys
import threading
import time
import tty
from pathlib import Path

import pytest

from processing.profile import load_profile
from tests.headless.helpers import ROOT, padtune

GH = "sim://greenhouse"


def test_pull_then_push_with_keep_then_pull_again_across_processes(tmp_path):
    flash = tmp_path / "gh.flash"
    url = f"{GH}?flash={flash}"
    first = tmp_path / "board.toml"
    r = padtune("pull", url, "-o", str(first))
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip() == f"wrote {first}: 9 channels from greenhouse" and r.stderr == ""
    pulled = load_profile(first)
    assert pulled.names[0] == "zone1" and pulled.defaults.threshold_counts == 30  # the factory settings
    text = first.read_text().replace("threshold_counts = 30", "threshold_counts = 44")
    text += '\n[channel.stop]\nthreshold_counts = 70\nhysteresis_counts = 9\n'
    tuned = tmp_path / "tuned.toml"
    tuned.write_text(text)
    r = padtune("push", str(tuned), url, "--keep")
    assert r.returncode == 0, r.stdout + r.stderr
    assert "written and kept" in r.stdout
    # A new board process (a power cycle of the simulated board) starts from what was kept.
    again = tmp_path / "again.toml"
    assert padtune("pull", url, "-o", str(again)).returncode == 0
    back = load_profile(again)
    assert back.defaults.threshold_counts == 44
    assert back.settings_for(back.names.index("stop")).hysteresis_counts == 9
    # Without --keep the board runs the profile until its next power cycle only.
    r = padtune("push", str(first), url)
    assert r.returncode == 0 and "not kept" in r.stdout
    assert padtune("pull", url, "-o", str(again)).returncode == 0
    assert load_profile(again).defaults.threshold_counts == 44


def test_a_keep_the_board_refuses_is_exit_1_with_its_reason(tmp_path):
    profile = tmp_path / "p.toml"
    assert padtune("pull", GH, "-o", str(profile)).returncode == 0
    # /proc takes no new files, even from root: the simulated board's flash write fails.
    r = padtune("push", str(profile), f"{GH}?flash=/proc/padtune-test.flash", "--keep")
    assert r.returncode == 1, r.stdout + r.stderr
    assert r.stdout.strip().splitlines() == [
        "padtune push: greenhouse: keep: refused: flash write failed: No such file or directory"]
    assert "Traceback" not in r.stderr


@pytest.mark.parametrize("args, says", [
    (["pull", f"{GH}?settings=0", "-o", "{tmp}/x.toml"], "does not take settings commands"),
    (["pull", GH, "-o", "/dev/null"], "is not a regular file"),
    (["pull", GH, "-o", "{tmp}"], "is a folder"),
    (["pull", GH, "-o", "{tmp}/no/such/x.toml"], "does not exist"),
    (["pull", "/dev/nonexistent-tty", "-o", "{tmp}/x.toml"], "/dev/nonexistent-tty"),
    (["push", "{tmp}/missing.toml", GH], "no such profile file"),
    (["push", "{tmp}/bad.toml", GH], "bad.toml"),
    (["push", "{tmp}/small.toml", GH], "has 9 channels, the profile 2"),
    (["push", "{tmp}/small.toml", f"{GH}?settings=0"], "does not take settings commands"),
    (["pull", GH], "-o"),
])
def test_user_mistakes_are_one_line_and_exit_2(tmp_path, args, says):
    bad = "format_version = 1\nchannels = 2\n[defaults]\nthreshold_counts = -4\n"
    (tmp_path / "bad.toml").write_text(bad)
    (tmp_path / "small.toml").write_text('format_version = 1\nchannels = 2\nnames = ["a", "b"]\n')
    r = padtune(*[a.replace("{tmp}", str(tmp_path)) for a in args])
    assert r.returncode == 2, r.stdout + r.stderr
    assert says in r.stderr and "Traceback" not in r.stderr
    assert len(r.stderr.strip().splitlines()) <= 3  # usage errors print argparse's usage line too
    assert not (tmp_path / "x.toml").exists()


def test_push_and_pull_through_a_sim_served_on_a_pseudo_terminal(tmp_path):
    link = tmp_path / "board"
    server = subprocess.Popen([sys.executable, "-m", "tui.cli", "sim", "pumphouse", "--link", str(link)],
                              cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.monotonic() + 30
        while not link.exists() and time.monotonic() < deadline:
            time.sleep(0.05)
        assert link.exists(), "padtune sim did not make its link"
        profile = tmp_path / "pump.toml"
        r = padtune("pull", str(link), "-o", str(profile))
        assert r.returncode == 0, r.stdout + r.stderr
        text = profile.read_text().replace("touch_debounce_frames = 2", "touch_debounce_frames = 5")
        profile.write_text(text)
        r = padtune("push", str(profile), str(link), "--keep")
        assert r.returncode == 0, r.stdout + r.stderr
        back = tmp_path / "back.toml"
        assert padtune("pull", str(link), "-o", str(back)).returncode == 0
        assert load_profile(back).defaults.touch_debounce_frames == 5
    finally:
        server.terminate()
        server.wait(timeout=30)


class LyingBoard:
    """A board on a pty that says settings=1 and answers `>ok` to every set, but changes nothing: push
    must catch it when it reads the settings back."""

    VAL = ("threshold_counts=30 hysteresis_counts=8 touch_debounce_frames=2 release_debounce_frames=2 "
           "baseline_slow_shift=6 baseline_fast_shift=2 baseline_period_frames=16 stuck_timeout_frames=0 "
           "polarity=+")

    def __init__(self, folder: Path) -> None:
        self.master, slave = os.openpty()
        tty.setraw(slave)
        self.slave = slave
        self.path = folder / "liar"
        os.symlink(os.ttyname(slave), self.path)
        self.stop = threading.Event()
        self.thread = threading.Thread(target=self._serve, daemon=True)
        self.thread.start()

    def _serve(self) -> None:
        import select

        pending = b""
        while not self.stop.is_set():
            ready, _, _ = select.select([self.master], [], [], 0.05)
            if not ready:
                continue
            try:
                pending += os.read(self.master, 4096)
            except OSError:
                return
            while b"\n" in pending:
                line, _, pending = pending.partition(b"\n")
                os.write(self.master, self._answer(line.decode().split()))

    def _answer(self, words: list[str]) -> bytes:
        if words == ["?"]:
            return b"! board=liar channels=2 names=a,b settings=1\n"
        if words[:1] == ["get"]:
            return f">val 0 {self.VAL}\n>val 1 {self.VAL}\n>ok get *\n".encode()
        if words[:1] == ["set"]:
            return f">ok set {words[1]} {' '.join(words[2:])}\n".encode()
        return f">no {words[0]}: unknown command\n".encode()

    def close(self) -> None:
        self.stop.set()
        self.thread.join(5)
        os.close(self.master)
        os.close(self.slave)


def test_push_reports_each_difference_when_the_board_does_not_hold_what_it_acknowledged(tmp_path):
    board = LyingBoard(tmp_path)
    try:
        profile = tmp_path / "two.toml"
        profile.write_text('format_version = 1\nchannels = 2\nnames = ["a", "b"]\n'
                           '[defaults]\nthreshold_counts = 30\nhysteresis_counts = 8\n'
                           'touch_debounce_frames = 2\nrelease_debounce_frames = 2\n'
                           '[channel.b]\nthreshold_counts = 55\n')
        r = padtune("push", str(profile), str(board.path))
    finally:
        board.close()
    assert r.returncode == 1, r.stdout + r.stderr
    assert r.stdout.strip().splitlines() == [
        "padtune push: b: threshold_counts is 30 on the board, 55 in the profile"]
