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


# What the fake boards below hold on every channel, whatever they were told.
BOARD_VAL = ("threshold_counts=30 hysteresis_counts=8 touch_debounce_frames=2 release_debounce_frames=2 "
           "baseline_slow_shift=6 baseline_fast_shift=2 baseline_period_frames=16 stuck_timeout_frames=0 "
           "polarity=+")


def test_push_reports_each_difference_when_the_board_does_not_hold_what_it_acknowledged(tmp_path):
    board = FakeBoard(tmp_path)  # acknowledges every set and goes on holding BOARD_VAL
    try:
        profile = tmp_path / "two.toml"
        profile.write_text('format_version = 1\nchannels = 2\nnames = ["k0", "k1"]\n'
                           '[defaults]\nthreshold_counts = 30\nhysteresis_counts = 8\n'
                           'touch_debounce_frames = 2\nrelease_debounce_frames = 2\n'
                           '[channel.k1]\nthreshold_counts = 55\n')
        r = padtune("push", str(profile), str(board.path))
    finally:
        board.close()
    assert r.returncode == 1, r.stdout + r.stderr
    assert r.stdout.strip().splitlines() == [
        "padtune push: k1: threshold_counts is 30 on the board, 55 in the profile"]


def test_a_sim_on_a_pseudo_terminal_answers_bytes_that_are_not_text_and_keeps_its_port(tmp_path):
    import serial

    link = tmp_path / "board"
    server = subprocess.Popen([sys.executable, "-m", "tui.cli", "sim", "pumphouse", "--link", str(link)],
                              cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.monotonic() + 30
        while not link.exists() and time.monotonic() < deadline:
            time.sleep(0.05)
        port = serial.Serial(str(link), 115200, timeout=0.1)
        said = b""
        port.write(b"get 0\xff\nget 0\x00\r" + b"x" * 300 + b" set 0 threshold_counts=99\r\nget 0\n")
        deadline = time.monotonic() + 20
        while b">ok get 0" not in said and time.monotonic() < deadline:
            said += port.read(65536)
        port.close()
        got = [line.split(b"*")[0] for line in said.split(b"\n") if line.startswith(b">")]
        assert got[:3] == [b">no get: not ASCII text", b">no get: not ASCII text",
                           b">no xxxxxxxxxxxxxxxx: line too long"]
        assert b"threshold_counts=30 " in got[3] and got[4] == b">ok get 0"
        assert server.poll() is None and link.exists()
    finally:
        server.terminate()
        _, err = server.communicate(timeout=30)
    assert "Traceback" not in err


class FakeBoard:
    """A board on a pty that says settings=1: `channels` channels answering `get *` at `byte_rate`
    bytes per second (as a slow UART would), each value line `val`; `echo` rewrites what `>ok set`
    echoes while the board holds what was sent."""

    def __init__(self, folder: Path, channels: int = 2, byte_rate: float = 0.0,
                 val: str = BOARD_VAL, echo: tuple[str, str] = ("", "")) -> None:
        self.channels, self.byte_rate, self.val, self.echo = channels, byte_rate, val, echo
        self.master, self.slave = os.openpty()
        tty.setraw(self.slave)
        self.path = folder / "fake"
        os.symlink(os.ttyname(self.slave), self.path)
        self.stop = threading.Event()
        self.thread = threading.Thread(target=self._serve, daemon=True)
        self.thread.start()

    def _serve(self) -> None:
        import select

        pending = b""
        while not self.stop.is_set():
            if not select.select([self.master], [], [], 0.05)[0]:
                continue
            try:
                pending += os.read(self.master, 4096)
            except OSError:
                return
            while b"\n" in pending:
                line, _, pending = pending.partition(b"\n")
                self._send(self._answer(line.decode().split()))

    def _send(self, data: bytes) -> None:
        step = max(1, int(self.byte_rate / 50)) if self.byte_rate else len(data)
        for i in range(0, len(data), step):
            if self.stop.is_set():
                return
            os.write(self.master, data[i:i + step])
            if self.byte_rate:
                time.sleep(step / self.byte_rate)

    def _answer(self, words: list[str]) -> bytes:
        if words == ["?"]:
            names = ",".join(f"k{c}" for c in range(self.channels))
            return f"! board=fake channels={self.channels} names={names} settings=1\n".encode()
        if words[:1] == ["get"]:
            vals = "".join(f">val {c} {self.val}\n" for c in range(self.channels))
            return f"{vals}>ok get *\n".encode()
        if words[:1] == ["set"]:
            return f">ok set {words[1]} {' '.join(words[2:]).replace(*self.echo)}\n".encode()
        return f">no {words[0]}: unknown command\n".encode()

    def close(self) -> None:
        self.stop.set()
        self.thread.join(5)
        os.close(self.master)
        os.close(self.slave)


def test_pull_waits_for_a_long_answer_while_it_is_still_coming(tmp_path):
    # 512 channels at 115200 Bd (11520 B/s): 111 KB of value lines take about 9.7 s, far past the
    # 2 s a silent board is given; the board is never silent that long, so pull must take it all.
    board = FakeBoard(tmp_path, channels=512, byte_rate=11520)
    try:
        out = tmp_path / "big.toml"
        r = padtune("pull", str(board.path), "-o", str(out))
    finally:
        board.close()
    assert r.returncode == 0, r.stdout + r.stderr
    assert load_profile(out).channels == 512


def test_push_fails_when_the_board_echoes_other_values_than_were_sent(tmp_path):
    board = FakeBoard(tmp_path, echo=("threshold_counts=55", "threshold_counts=56"))
    try:
        profile = tmp_path / "two.toml"
        profile.write_text('format_version = 1\nchannels = 2\nnames = ["k0", "k1"]\n'
                           '[defaults]\nthreshold_counts = 30\nhysteresis_counts = 8\n'
                           'touch_debounce_frames = 2\nrelease_debounce_frames = 2\n'
                           '[channel.k1]\nthreshold_counts = 55\n')
        r = padtune("push", str(profile), str(board.path))
    finally:
        board.close()
    assert r.returncode == 1, r.stdout + r.stderr
    lines = r.stdout.strip().splitlines()
    assert lines[0] == ("padtune push: fake: set 1 threshold_counts=55 hysteresis_counts=8 "
                        "touch_debounce_frames=2 release_debounce_frames=2 baseline_slow_shift=6 "
                        "baseline_fast_shift=2 baseline_period_frames=16 stuck_timeout_frames=0: failed: "
                        "threshold_counts: the board says it now holds threshold_counts=56, not "
                        "threshold_counts=55 as sent")


@pytest.mark.parametrize("held, says", [
    (("threshold_counts=30", "threshold_counts=0"), "padtune pull: fake: get *: failed: channel 0: the board "
     "holds threshold_counts=0, which a profile cannot: must be between 1 and 16777216\n"),
    (("hysteresis_counts=8", "hysteresis_counts=30"), "padtune pull: fake: get *: failed: channel 0: the "
     "board holds hysteresis_counts=30, which a profile cannot: 30 must be below the threshold (30), or "
     "the key could never release\n"),
    (("threshold_counts=30", "threshold_counts=999999999999"), "padtune pull: fake: get *: failed: "
     "unreadable answer (threshold_counts: 999999999999 is out of range: must be between 1 and 16777216)"),
])
def test_pull_says_in_one_sentence_what_a_board_holds_that_a_profile_cannot(tmp_path, held, says):
    board = FakeBoard(tmp_path, val=BOARD_VAL.replace(*held))
    try:
        r = padtune("pull", str(board.path), "-o", str(tmp_path / "x.toml"))
    finally:
        board.close()
    assert r.returncode == 1 and r.stdout.startswith(says), r.stdout + r.stderr
    assert len(r.stdout.splitlines()) == 1 and r.stderr == ""
    assert not (tmp_path / "x.toml").exists()
