"""The harness as a board on a real pseudo-terminal: `padtune monitor` (a subprocess) reads its frames,
names and info keys and finds its touches; a host on pyserial drives its command parser between frames.
"""

from __future__ import annotations

import dataclasses
import os
import subprocess
import time

import pytest
import serial

from processing.profile import load_profile, profile_for, save_profile
from processing.settings import ChannelSettings
from protocol.command_client import run_commands
from protocol.decoder import Decoder
from protocol.events import FrameBlock
from tests.firmware import c_build
from tests.headless.helpers import ROOT, padtune
from tests.headless.test_link_commands import Monitor

pytestmark = pytest.mark.e2e
WAIT_S = 30.0
NAMES = ("inlet", "valve2", "stop")


def decoder_reads_state_field() -> bool:
    """Whether padtune's decoder reads the frame's state field yet (branch i11-twin brings it)."""
    events = Decoder().feed(b"! proto=1 channels=2\n@0 5 6;02\n", 0.0)
    return any(isinstance(e, FrameBlock) for e in events)


class HarnessPty:
    """The harness serving on a new pseudo-terminal (its path is its first line on stdout)."""

    def __init__(self, *args: str) -> None:
        self.proc = subprocess.Popen([str(c_build.harness()), "--pty", *args], stdout=subprocess.PIPE,
                                     stderr=subprocess.PIPE, env={**os.environ, **c_build.SAN_ENV})
        assert self.proc.stdout is not None
        self.path = self.proc.stdout.readline().decode().strip()
        assert self.path.startswith("/dev/"), self.proc.stderr.read() if self.proc.stderr else ""

    def stop(self) -> str:
        self.proc.terminate()
        try:
            self.proc.wait(WAIT_S)
        finally:
            if self.proc.poll() is None:
                self.proc.kill()
        assert self.proc.stderr is not None
        err = self.proc.stderr.read().decode()
        assert "Sanitizer" not in err and "runtime error" not in err, err
        assert self.proc.returncode == 0, err
        return err


def test_padtune_monitor_reads_the_c_board_and_finds_its_touches():
    states = decoder_reads_state_field()
    # 200 Hz: a 0.3 s touch every 3 s, so padtune finds its quiet second first (provisional settings)
    touches = [a for k in range(30) for a in ("--touch", f"1@{400 + 600 * k}+60")]
    board = HarnessPty("--channels", "3", "--names", ",".join(NAMES), "--rate", "200", "--board",
                       "pump-house", *touches, *([] if states else ["--no-states"]))
    mon = Monitor(board.path)
    try:
        mon.wait_text('"type":"release"')
        events = mon.finish()
    finally:
        board.stop()
    hello = [e for e in events if e["type"] == "hello"]
    assert hello and hello[-1]["names"] == list(NAMES) and hello[-1]["board"] == "pump-house"
    fields = hello[-1]["fields"]
    assert fields["settings"] == "1" and fields.get("states") == ("1" if states else None)
    assert hello[-1]["rate_hz"] == 200 and hello[-1]["polarity"] == ["+"]
    detections = [e for e in events if e["type"] in ("touch", "release")]
    assert detections and {e["channel"] for e in detections} == {"valve2"}
    summary = events[-1]
    assert summary["type"] == "summary" and summary["frames"] > 200
    assert summary["garbled"] == summary["bad_checksum"] == summary["lost"] == 0, summary


def read_until(port: serial.Serial, last: bytes) -> list[bytes]:
    """Lines starting with `>` or `!` (frames go by meanwhile) up to and including one starting `last`."""
    got: list[bytes] = []
    buf = b""
    deadline = time.monotonic() + WAIT_S
    while True:
        assert time.monotonic() < deadline, f"no {last!r}: {got[-3:]}"
        buf += port.read(port.in_waiting or 1)
        *lines, buf = buf.split(b"\n")
        for line in lines:
            body = line.rpartition(b"*")[0]
            if body.startswith((b">", b"! ")):
                got.append(body)
                if body.startswith(last):
                    return got


def test_a_host_on_pyserial_sets_and_reads_settings_between_frames(tmp_path):
    board = HarnessPty("--channels", "2", "--rate", "500", "--keep-file", str(tmp_path / "flash"))
    try:
        with serial.Serial(board.path, 115200, timeout=0.2) as port:
            port.write(b"set 1 threshold_counts=64 hysteresis_counts=10 polarity=-\r")
            ok = b">ok set 1 threshold_counts=64 hysteresis_counts=10 polarity=-"
            assert read_until(port, b">")[-1] == ok
            port.write(b"get *\r\n")
            answer = read_until(port, b">ok get *")
            assert answer[-3].startswith(b">val 0 threshold_counts=100 ")
            assert answer[-2].startswith(b">val 1 threshold_counts=64 hysteresis_counts=10 ")
            assert answer[-2].endswith(b" polarity=-")
            port.write(b"?\nkeep\n")
            answer = read_until(port, b">ok keep")
            assert answer[0].startswith(b"! board=harness channels=2 rate=500 ")
            assert b"polarity=+,-" in answer[0]
    finally:
        board.stop()
    kept = (tmp_path / "flash").read_text().splitlines()[1]
    assert kept == "64 10 3 3 6 2 16 0 -1"  # threshold .. stuck timeout, polarity


def test_padtune_runs_its_twin_against_the_c_board_and_sees_it_deviate(tmp_path):
    """With the profile the board was built with, padtune compares the board's states with its own
    frame by frame: an honest run of touches agrees on every frame; a board told to deviate (channel 2
    reports the wrong state for 20 frames) is reported at once, as a `twin_mismatch` on that key."""
    if not decoder_reads_state_field():
        pytest.skip("padtune's decoder does not read the frame's state field yet (branch i11-twin)")
    profile = tmp_path / "board.toml"
    save_profile(profile_for(3, NAMES, board="pump-house", polarity=(1, 1, 1), rate_hz=200.0), profile)
    touches = [a for k in range(30) for a in ("--touch", f"{k % 3}@{400 + 300 * k}+60")]
    for deviate in ((), ("--deviate", "2@1300+20")):
        board = HarnessPty("--channels", "3", "--names", ",".join(NAMES), "--rate", "200", *touches, *deviate)
        mon = Monitor(board.path, "--profile", str(profile))
        try:
            mon.wait_text('"type":"twin_mismatch"' if deviate else '"channel":"stop"')
            if not deviate:
                mon.wait_text('"type":"release","t"')
            events = mon.finish()
        finally:
            board.stop()
        summary = events[-1]
        mismatches = [e for e in events if e["type"] == "twin_mismatch"]
        assert summary["twin_compared"] > 200, summary
        if deviate:
            assert mismatches[0]["channel"] == "stop" and mismatches[0]["board_state"] == "touched"
            assert mismatches[0]["padtune_state"] == "released" and mismatches[0]["count"] == 1
        else:
            assert mismatches == [] and summary["twin_mismatches"] == 0
            assert {e["channel"] for e in events if e["type"] == "touch"} >= {"stop"}


def test_padtune_pull_and_push_keep_against_the_c_board(tmp_path):
    """Settings travel both ways with the C parser: `padtune pull` reads the board into a profile,
    `padtune push --keep` writes an edited one, keeps it (the harness's flash file) and verifies it."""
    if not (ROOT / "tui" / "commands" / "push.py").exists():
        pytest.skip("padtune pull / push are not here yet (branch i11-travel)")
    flash = tmp_path / "flash"
    board = HarnessPty("--channels", "3", "--names", ",".join(NAMES), "--rate", "50",
                       "--keep-file", str(flash))
    try:
        pulled = padtune("pull", board.path, "-o", str(tmp_path / "pulled.toml"), timeout=60)
        assert pulled.returncode == 0, pulled.stderr
        profile = load_profile(tmp_path / "pulled.toml")
        assert profile.names == NAMES and profile.settings_for(1) == ChannelSettings()
        seventy = dataclasses.replace(profile.defaults, threshold_counts=70)
        edited = dataclasses.replace(profile, defaults=seventy)
        save_profile(edited, tmp_path / "edited.toml")
        pushed = padtune("push", str(tmp_path / "edited.toml"), board.path, "--keep", timeout=60)
        assert pushed.returncode == 0, pushed.stdout + pushed.stderr
    finally:
        board.stop()
    assert [line.split()[0] for line in flash.read_text().splitlines()] == ["70", "70", "70"]


def test_the_host_shows_the_c_boards_reasons_as_given(tmp_path):
    """The board's own short reasons reach the user word for word: padtune's command client over the
    pseudo-terminal (as the live screen and `padtune pull` / `push` use it), and `padtune push --keep`
    against a board whose storage fails."""
    board = HarnessPty("--channels", "2", "--rate", "50", "--keep-file", str(tmp_path / "gone" / "flash"))
    try:
        with serial.Serial(board.path, 115200, timeout=0.05) as port:
            decoder = Decoder()
            results = run_commands(lambda line: port.write(line) == len(line),
                                   lambda: decoder.feed(port.read(port.in_waiting or 1), time.monotonic()),
                                   [b"set 1 hysteresis_counts=100\n", b"set * touch_debounce_frames=300\n",
                                    b"get 2\n", b"set 0 threshold_counts=64\n"], timeout_s=WAIT_S)
        assert [r.describe() for r in results] == [
            "set 1 hysteresis_counts=100: refused: hysteresis_counts: must be 0..threshold_counts-1",
            "set * touch_debounce_frames=300: refused: touch_debounce_frames: must be 1..255 (channel 0)",
            "get 2: refused: no such channel",
            "set 0 threshold_counts=64: applied"]
        profile = tmp_path / "board.toml"
        save_profile(profile_for(2, ("a", "b"), board="harness", polarity=(1, 1), rate_hz=50.0), profile)
        pushed = padtune("push", str(profile), board.path, "--keep", timeout=60)
    finally:
        board.stop()
    assert pushed.returncode == 1
    assert "harness: keep: refused: storage cannot be written" in pushed.stdout, pushed.stdout


def test_the_host_presses_a_simulated_key_by_name_or_number():
    """`+NAME` / `-N`, as padtune's simulated boards take them: the board's own state for that key goes
    to touched and back (its frames say so), and no answer line is sent for them."""
    board = HarnessPty("--channels", "3", "--names", ",".join(NAMES), "--rate", "500")
    seen: list[bytes] = []

    def wait_state(port: serial.Serial, want: str, after_seq: int = 0) -> None:
        buf = b""
        deadline = time.monotonic() + WAIT_S
        while True:
            assert time.monotonic() < deadline, f"valve2 never {want}: {seen[-3:]}"
            buf += port.read(port.in_waiting or 1)
            *lines, buf = buf.split(b"\n")
            seen.extend(lines)
            if any(line.startswith(b"@") and int(line[1:line.index(b" ")]) >= after_seq
                   and line.split(b";")[1][1:2] == want.encode() for line in lines):
                return

    try:
        with serial.Serial(board.path, 115200, timeout=0.2) as port:
            # released for 20 frames first: a key held when the board starts is its baseline, never a touch
            wait_state(port, "0", after_seq=20)
            port.write(b"+valve2\n")
            wait_state(port, "2")
            port.write(b"-1\r\n")
            wait_state(port, "0")
    finally:
        board.stop()
    assert not [line for line in seen if line.startswith(b">")]
