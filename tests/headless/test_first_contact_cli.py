"""A board met with no profile, through the command line as a subprocess: every shipped simulated board
detects its scripted touches on provisional settings; a pseudo-terminal board whose counts fall, with
no info line, teaches its direction with its first touch and then reports touch and release on the
right key at the right frame; `--polarity` for monitor, replay, watch and demo.
"""

from __future__ import annotations

import re
import signal
import subprocess
import sys
import threading
import time

import numpy as np
import pytest

from devices.simulator import SimBoard
from processing.provisional import debounce_frames
from tests.headless.helpers import ROOT, json_lines, match_touches, padtune
from tests.headless.test_live_commands import WAIT_S, LineWatcher, wait_rows
from tests.protocol.ptyboard import PtyBoard

pytestmark = pytest.mark.e2e
BACKLOG_S = 60  # sim:// keeps this many seconds for a reader that stalls (a loaded machine)
QUIET_UNTIL_S = 1.5  # board seconds: a touch before the quiet second has ended is not reported (by design)

# board, its frame rate, sim speed, how much board time to cover, board time after which the script
# holds only water films (not this test's business) or repeats, and a seed whose first touch comes
# after the quiet second
BOARDS = [("greenhouse", 60.0, 8, 22.0, 22.5, 3), ("pumphouse", 50.0, 8, 14.5, 14.8, 3),
          ("grid64", 1000.0, 2, 6.0, 6.0, 4)]


@pytest.mark.parametrize(("board", "rate_hz", "speed", "cover_s", "horizon_s", "seed"), BOARDS,
                         ids=[b[0] for b in BOARDS])
def test_every_shipped_board_detects_its_script_with_no_profile(board, rate_hz, speed, cover_s, horizon_s,
                                                                 seed):
    url = f"sim://{board}?speed={speed}&seed={seed}&backlog_s={BACKLOG_S}"
    out = padtune("monitor", url, "--json", "--duration", f"{cover_s / speed + 0.6:.2f}", "--every", "0.5")
    assert out.returncode == 0, out.stderr
    events = json_lines(out.stdout)
    summary = events[-1]
    assert summary["type"] == "summary" and summary["lost"] == 0
    sim_s = summary["frames"] / rate_hz
    assert sim_s >= cover_s - 0.5, f"only {sim_s:.1f} s of board time arrived"
    horizon = min(horizon_s, sim_s - 1.0)
    # Frame index n is board time n / rate: compare with the script in board time.
    truth = [c for c in SimBoard(board, seed=seed).touches.truth(horizon) if c.kind != "water"]
    assert all(c.start_s >= QUIET_UNTIL_S for c in truth), "the script touches during the quiet second"
    found = [{**e, "t": e["index"] / rate_hz} for e in events if e["type"] == "touch"]
    found = [t for t in found if t["t"] < horizon]
    names = SimBoard(board, seed=seed).spec.names
    missing, extra = match_touches(found, truth, rate_hz, debounce_frames(rate_hz), names)
    assert truth and not missing and not extra, (missing, extra)
    # the status rows mark every channel provisional, with the polarity from the board's info line
    last = [e for e in events if e["type"] == "status"][-1]["channels"]
    sign = "+" if board == "greenhouse" else "-"  # charge time rises; an oscillator and charge sharing fall
    assert {(r["provisional"], r["polarity"], r["phase"]) for r in last} == {(True, sign, "ready")}
    assert "no profile given: each channel's threshold and hysteresis are provisional" in out.stderr
    assert "provisional settings from the quiet noise" in out.stderr


class FallingBoard:
    """A board on a pseudo-terminal that prints bare columns and no info line, at `rate_hz` lines a
    second once the port is open; channel 1's counts fall by 300 while it is touched."""

    def __init__(self, folder, rate_hz: float = 200.0, lines: int = 800,
                 touches: tuple[tuple[int, int], ...] = ((300, 360), (600, 660))) -> None:
        self.pty = PtyBoard(folder)
        self.rate_hz = rate_hz
        rng = np.random.default_rng(7)
        self.rows = 1000 + rng.integers(-3, 4, (lines, 3))
        self.rows[:, 2] += 500
        for a, b in touches:
            self.rows[a:b, 1] -= 300
        self.done = threading.Event()
        self.stop = threading.Event()  # set before closing the pty: the player ends between batches

    def play(self) -> None:
        start = time.monotonic()
        batch = 5
        for pos in range(0, len(self.rows), batch):
            if self.stop.is_set():
                break
            delay = start + pos / self.rate_hz - time.monotonic()
            if delay > 0:
                time.sleep(delay)
            text = "".join(" ".join(str(v) for v in row) + "\n" for row in self.rows[pos:pos + batch])
            self.pty.send(text.encode())
        self.done.set()


def _run_monitor(board: FallingBoard, folder, *extra: str) -> tuple[list[dict], str]:
    """`padtune monitor --json` on the board until every line it plays has been read (counted in a
    recording of the same run), then SIGTERM: its events and its stderr."""
    rec = folder / "run.csv"
    proc = subprocess.Popen([sys.executable, "-m", "tui.cli", "monitor", str(board.pty.path), "--json",
                             "--record", str(rec), *extra],
                            cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    watcher = LineWatcher(proc)
    try:
        watcher.wait_text('"event":"connected"')
        player = threading.Thread(target=board.play, daemon=True)
        player.start()
        assert board.done.wait(WAIT_S), "the board could not send its lines"
        wait_rows(rec, len(board.rows))
        proc.send_signal(signal.SIGTERM)
        proc.wait(WAIT_S)
        err = proc.stderr.read()
        out = watcher.finish()
    finally:
        if proc.poll() is None:
            proc.kill()
        board.pty.close()
    return json_lines(out), err


def test_falling_counts_without_an_info_line_through_monitor_json(tmp_path):
    # Issue 9: such a board had its touch reported at the lift and never released. Now: the first touch
    # (lines 300-359) teaches the direction and is not reported; the second (600-659) is a touch and a
    # release of ch1 at the frames the debounce says, and nothing else is reported.
    board = FallingBoard(tmp_path)
    events, err = _run_monitor(board, tmp_path)
    assert "padtune: ch1: counts fall on touch: polarity -" in err, err
    debounce = int(re.search(r"debounce (\d+) frames", err).group(1))
    reported = [(e["type"], e["channel"], e["index"]) for e in events if e["type"] in ("touch", "release")]
    assert reported == [("touch", "ch1", 600 + debounce - 1), ("release", "ch1", 660 + debounce - 1)], err
    summary = events[-1]
    assert summary["frames"] == 800 and [c["touches"] for c in summary["channels"]] == [0, 1, 0]


def test_polarity_on_the_command_line_skips_the_lesson(tmp_path):
    # With --polarity - the first touch is a touch already: nothing to learn.
    board = FallingBoard(tmp_path, lines=700, touches=((300, 360),))
    events, err = _run_monitor(board, tmp_path, "--polarity", "-")
    assert "counts fall on touch" not in err and "no polarity given" not in err
    debounce = int(re.search(r"debounce (\d+) frames", err).group(1))
    reported = [(e["type"], e["channel"], e["index"]) for e in events if e["type"] in ("touch", "release")]
    assert reported == [("touch", "ch1", 300 + debounce - 1), ("release", "ch1", 360 + debounce - 1)], err


def test_replay_takes_polarity_too(tmp_path):
    # A raw capture of a falling board without an info line: learned, or given per channel.
    rows = 1000 + np.random.default_rng(2).integers(-2, 3, (600, 2))
    rows[200:250, 0] -= 200
    rows[400:450, 0] -= 200
    capture = tmp_path / "falling.txt"
    capture.write_text("".join(f"{a} {b}\n" for a, b in rows))
    learned = padtune("replay", str(capture), "--json", "--rate", "100")
    given = padtune("replay", str(capture), "--json", "--rate", "100", "--polarity", "-,+")
    assert learned.returncode == 0 and given.returncode == 0, learned.stderr + given.stderr

    def reported(out):
        return [(e["type"], e["channel"], e["index"]) for e in json_lines(out.stdout)
                if e["type"] in ("touch", "release")]

    assert reported(learned) == [("touch", "ch0", 402), ("release", "ch0", 452)]
    assert reported(given) == [("touch", "ch0", 202), ("release", "ch0", 252), ("touch", "ch0", 402),
                               ("release", "ch0", 452)]
    assert "ch0: counts fall on touch: polarity -" in learned.stderr


@pytest.mark.parametrize("command", ["monitor", "replay", "watch", "demo"])
def test_a_bad_polarity_is_one_line_and_exit_2(command, tmp_path):
    target = [] if command == "demo" else [str(tmp_path / "nothing")]
    out = padtune(command, *target, "--polarity", "+,x")
    assert out.returncode == 2 and "'x' is not + or -" in out.stderr and "Traceback" not in out.stderr
    assert len(out.stderr.strip().splitlines()) == 1


def test_watch_and_demo_hand_polarity_to_the_session(monkeypatch):
    from tui import cli
    from tui.commands import demo, watch

    seen = {}

    def fake_run_live(target, baud, profile_path, demo=False, start_profile=None, notices=(), polarity=()):
        seen[target.split("?")[0]] = polarity
        return 0

    monkeypatch.setattr(demo, "run_live", fake_run_live)
    monkeypatch.setattr(watch, "run_live", fake_run_live)
    assert cli.main(["demo", "--polarity", "-"]) == 0
    assert cli.main(["watch", "/dev/ttyACM9", "--polarity", "-,+,-"]) == 0  # a list starting with -
    assert seen == {"sim://greenhouse": (-1,), "/dev/ttyACM9": (-1, 1, -1)}


def test_tune_learns_the_polarity_of_a_recording_that_does_not_say(tmp_path):
    # A raw capture of a board whose counts fall, no info line: tune finds each key's direction from its
    # first touch (as the live session does), suggests from touches the right way up and saves the
    # polarity, so the profile needs no lesson when it is used.
    rng = np.random.default_rng(5)
    rows = 2000 + rng.integers(-3, 4, (1400, 2))
    for start in (300, 700, 1100):
        rows[start:start + 80, 0] -= 250
        rows[start + 40:start + 120, 1] -= 180
    capture = tmp_path / "falling.txt"
    capture.write_text("".join(f"{a} {b}\n" for a, b in rows))
    out = padtune("tune", str(capture), "--rate", "100", "-o", str(tmp_path / "p.toml"), "--json")
    assert out.returncode == 0, out.stderr
    from processing.profile import load_profile

    profile = load_profile(tmp_path / "p.toml")
    assert profile.polarity == (-1, -1)
    assert 3 < profile.settings_for(0).threshold_counts < 250
    assert 3 < profile.settings_for(1).threshold_counts < 180
    replayed = padtune("replay", str(capture), "--rate", "100", "--profile", str(tmp_path / "p.toml"),
                       "--json")
    counts = {c["name"]: c["touches"] for c in json_lines(replayed.stdout)[-1]["channels"]}
    assert counts == {"ch0": 3, "ch1": 3}  # the first touch is a touch too: nothing left to learn


@pytest.mark.parametrize("given", [(), ("--polarity", "-")])
def test_check_does_not_learn_it_says_what_it_assumes(tmp_path, given):
    # A production check never spends a touch on a lesson: with no polarity from the profile, the board
    # or --polarity, it checks with + and says so on stderr; --polarity is taken as given.
    import os

    from processing.profile import profile_for, save_profile
    from tests.headless.test_live_commands import _holds_open

    save_profile(profile_for(3), tmp_path / "three.toml")
    board = FallingBoard(tmp_path, lines=400, touches=())
    proc = subprocess.Popen([sys.executable, "-m", "tui.cli", "check", str(board.pty.path), "--profile",
                             str(tmp_path / "three.toml"), "--duration", "1", "--json", "--no-limits",
                             *given],
                            cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        deadline = time.monotonic() + WAIT_S
        while not _holds_open(proc.pid, os.path.realpath(board.pty.path)):
            assert proc.poll() is None and time.monotonic() < deadline, "the check never opened the port"
            time.sleep(0.02)
        player = threading.Thread(target=board.play, daemon=True)
        player.start()
        out, err = proc.communicate(timeout=WAIT_S)
        board.stop.set()
        player.join(WAIT_S)
    finally:
        if proc.poll() is None:
            proc.kill()
        board.pty.close()
    assert proc.returncode == 0, err
    told = "no polarity for ch0, ch1, ch2 (the profile and the board do not say): checking with +"
    assert (told in err) == (not given), err
    assert json_lines(out)[0]["passed"]
