"""`padtune monitor` as a subprocess on boards met for the first time: one already running (asked with
`?`), behind a real RFC 2217 server and a TCP bridge, silent, stalling, printing text in no form
padtune reads, sending binary over a socket, flooding one repeated frame; and URLs that cannot open.
What a user sees is checked: the JSON events on stdout and the `padtune: ...` lines on stderr."""

from __future__ import annotations

import re
import signal
import subprocess
import sys
import threading
import time

import numpy as np
import pytest

from protocol.decoder import Decoder
from protocol.encoder import encode_info
from tests.headless.helpers import ROOT, json_lines, padtune
from tests.protocol.netserve import Rfc2217Server, TcpBridge
from tests.protocol.ptyboard import PtyBoard
from tests.protocol.runningboard import PtyEnd, RunningBoard

pytestmark = pytest.mark.e2e
WAIT_S = 30.0  # generous: the machine running the tests may be loaded


class Monitor:
    """`padtune monitor TARGET --json ...` running; stdout lines collected by a thread."""

    def __init__(self, target: str, *args: str) -> None:
        self.proc = subprocess.Popen([sys.executable, "-m", "tui.cli", "monitor", target, "--json", *args],
                                     cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
        self.lines: list[str] = []
        self._thread = threading.Thread(target=self._read, daemon=True)
        self._thread.start()
        self.err = ""

    def _read(self) -> None:
        assert self.proc.stdout is not None
        for line in self.proc.stdout:
            self.lines.append(line)

    def wait_text(self, text: str) -> None:
        deadline = time.monotonic() + WAIT_S
        while not any(text in line for line in self.lines):
            assert self.proc.poll() is None or self._thread.is_alive(), f"monitor ended before {text}"
            assert time.monotonic() < deadline, f"timed out waiting for {text}: {self.lines[-3:]}"
            time.sleep(0.02)

    def finish(self) -> list[dict]:
        """SIGTERM (unless it already ended), then every JSON event; stderr is in `err`."""
        if self.proc.poll() is None:
            self.proc.send_signal(signal.SIGTERM)
        try:
            self.proc.wait(WAIT_S)
        finally:
            if self.proc.poll() is None:
                self.proc.kill()
        self._thread.join(WAIT_S)
        assert self.proc.stderr is not None
        self.err = self.proc.stderr.read()
        assert self.proc.returncode == 0, self.err
        return json_lines("".join(self.lines))


def links(events: list[dict], kind: str) -> list[dict]:
    return [e for e in events if e["type"] == "link" and e["event"] == kind]


def check_touch_frames(events: list[dict], board: RunningBoard, name: str) -> None:
    """One touch and one release on `name`, at the frames the board touched and let go (within the
    3-frame debounce), counted from the first frame padtune read (none lost, no reset)."""
    summary = events[-1]
    assert summary["type"] == "summary" and summary["lost"] == 0 and summary["resets"] == 0
    first = board.first_seq_read(summary["frames"])
    lo, hi = board.touch_seqs
    touches = [e for e in events if e["type"] == "touch"]
    releases = [e for e in events if e["type"] == "release"]
    assert [t["channel"] for t in touches] == [name] and [r["channel"] for r in releases] == [name]
    assert lo - first <= touches[0]["index"] <= lo - first + 3, (touches, lo - first)
    assert hi - first <= releases[0]["index"] <= hi - first + 3, (releases, hi - first)
    assert abs(touches[0]["delta"]) >= 500


def test_a_running_board_answers_the_question_and_its_falling_touch_is_found(tmp_path):
    """The board printed `! proto=1 ...` before padtune opened (lost); it answers `?` with its names and
    polarity `-`: the touch that lowers its counts is found on the right key at the right frame."""
    pty = PtyBoard(tmp_path)
    end = PtyEnd(pty)
    end.out(encode_info({"proto": 1, "board": "pumphouse", "channels": 2, "names": "inlet,outlet"}))
    answer = encode_info({"board": "pumphouse", "names": "inlet,outlet", "polarity": "-"})
    board = RunningBoard(end.out, end.inp, answer=answer, touch=(1, -600)).start()
    mon = Monitor(str(pty.path))
    try:
        mon.wait_text('"text":"end of script"')
        events = mon.finish()
    finally:
        board.stop()
        pty.close()
    hello = [e for e in events if e["type"] == "hello"]
    assert hello and hello[0]["names"] == ["inlet", "outlet"] and hello[0]["polarity"] == ["-"]
    check_touch_frames(events, board, "outlet")
    assert board.heard.count(b"?\n") == 1


def test_monitor_over_rfc2217_reads_frames_and_a_touch():
    server = Rfc2217Server()
    answer = encode_info({"board": "pumphouse", "names": "inlet,outlet", "polarity": "+"})
    board = RunningBoard(server.out, server.inp, answer=answer, touch=(0, 600)).start()
    mon = Monitor(f"rfc2217://localhost:{server.port}", "--baud", "57600")
    try:
        mon.wait_text('"text":"end of script"')
        events = mon.finish()
    finally:
        board.stop()
        server.close()
    check_touch_frames(events, board, "inlet")
    assert server.baudrates[-1] == 57600
    assert "no effect" not in mon.err and "Traceback" not in mon.err  # --baud does set the remote rate


def test_a_silent_board_then_unreadable_text_then_a_stall(tmp_path):
    """Nothing for 2 s (never spoke), then chatty text in no form padtune reads, then nothing again:
    each is said once, in JSON and on stderr, in words; no baud-rate advice for readable text."""
    pty = PtyBoard(tmp_path)
    mon = Monitor(str(pty.path))
    try:
        mon.wait_text('"event":"silent"')
        pty.send(b"Pad scan v3 ready\r\n" + b"pad A raw 1234 base 1200 -> idle\r\n" * 20)
        mon.wait_text('"event":"unreadable"')
        mon.wait_text("stalled")
        events = mon.finish()
    finally:
        pty.close()
    silent = links(events, "silent")
    assert "never spoke" in silent[0]["detail"] and silent[0]["count"] >= 2
    assert "stalled" in silent[-1]["detail"] and silent[-1]["count"] >= 2
    (unreadable,) = links(events, "unreadable")
    assert "'Pad scan v3 ready'" in unreadable["detail"] and "Plain forms" in unreadable["detail"]
    assert not links(events, "baud_suspect") and "baud" not in mon.err
    told = [line for line in mon.err.splitlines() if line.startswith("padtune: ")]
    assert any("never spoke" in line for line in told) and any("stalled" in line for line in told)
    assert any("'Pad scan v3 ready'" in line for line in told)


def test_binary_over_a_socket_gets_no_baud_advice_and_baud_is_said_to_do_nothing():
    bridge = TcpBridge()
    rng = np.random.default_rng(9)
    noise = bytes(rng.choice([0x00, 0x80, 0xF8, 0xFE, 0xE0, 0x0A], size=400).tolist())
    mon = Monitor(bridge.url, "--baud", "9600")
    try:
        mon.wait_text('"event":"connected"')
        deadline = time.monotonic() + WAIT_S
        while not any('"event":"unreadable"' in line for line in mon.lines):
            bridge.out(noise)  # a bridge relaying a serial line at the wrong rate, say
            assert time.monotonic() < deadline, mon.lines[-3:]
            time.sleep(0.1)
        events = mon.finish()
    finally:
        bridge.close()
    (unreadable,) = links(events, "unreadable")
    assert "no baud rate" in unreadable["detail"] and "rfc2217://" in unreadable["detail"]
    assert not links(events, "baud_suspect") and "probably wrong" not in mon.err
    notes = [line for line in mon.err.splitlines() if "--baud 9600 has no effect" in line]
    assert len(notes) == 1 and notes[0].startswith("padtune: ")


def _decoder_counts_repeats() -> bool:
    """The decoder's side of the flood (counted `repeated` faults) is another branch's work."""
    d = Decoder()
    d.feed(b"@5 100 200\n@5 100 200\n", 0.0)
    return "repeated" in d.stats.extra


@pytest.fixture(scope="module")
def flood(tmp_path_factory):
    """A board flooding one repeated sequenced frame (20,000 lines), then quiet; monitor's output."""
    pty = PtyBoard(tmp_path_factory.mktemp("flood"))
    mon = Monitor(str(pty.path))
    try:
        mon.wait_text('"event":"connected"')
        lines = 20_000
        pty.send(b"@5 100 200\n" * lines)
        # Every byte read, and the board quiet for 2 s: the link's stall report says so.
        mon.wait_text(f"stalled: nothing for 2 s after {lines * 11} bytes")
        events = mon.finish()
    finally:
        pty.close()
    return lines, events, mon.err


def test_a_flood_of_one_repeated_frame_gives_a_few_stderr_lines_that_count_it_all(flood):
    _, events, err = flood
    told = err.splitlines()
    assert 1 <= len(told) <= 12, told  # not one line per frame
    assert all(line.startswith("padtune: ") for line in told), told
    resets = sum(e["count"] for e in links(events, "reset"))
    if resets:  # today's decoder: each repeat is a reset, and every one of them is in a count
        shown = 0
        for line in told:
            if "board reset: baselines taken again" in line:
                m = re.search(r"\(x(\d+) in \d+\.\d s\)$", line)
                shown += int(m.group(1)) if m else 1
        # (the link's bounded queue may have dropped some of these events, behind an overflow marker)
        assert shown == resets and resets >= 1000
    else:  # the decoder counts repeats: they are told, at a bounded rate
        assert any("repeated" in line for line in told)


@pytest.mark.skipif(not _decoder_counts_repeats(), reason="needs the decoder's counted `repeated` faults")
def test_a_flood_of_one_repeated_frame_gives_a_few_json_events(flood):
    lines, events, _ = flood
    assert len([e for e in events if e["type"] == "link"]) <= 40
    # Reported as the count reaches powers of two: at least half of the repeats are in the events.
    assert (lines - 1) / 2 <= sum(e["count"] for e in links(events, "repeated")) <= lines - 1
    assert events[-1]["frames"] == lines and events[-1]["resets"] == 0


def closed_port() -> int:
    import socket

    with socket.create_server(("127.0.0.1", 0)) as s:
        return s.getsockname()[1]


@pytest.mark.parametrize(("url", "message"), [
    ("rfc2217://127.0.0.1:{closed}", "connection refused"),
    ("socket://127.0.0.1", "is not a valid address"),
    ("loop://?logging=loud", "KeyError"),
    ("nosuch://board", "unknown port URL scheme nosuch:// in nosuch://board"),
])
def test_a_port_that_cannot_open_is_one_stderr_line_and_exit_2(url, message):
    url = url.replace("{closed}", str(closed_port()))
    out = padtune("monitor", url, "--json", "--duration", "1")
    assert out.returncode == 2 and out.stdout == ""
    assert out.stderr.count("\n") == 1 and out.stderr.startswith("padtune: ") and url in out.stderr
    assert message in out.stderr and "Traceback" not in out.stderr


def test_replay_of_a_board_resetting_all_the_time_gives_a_few_counted_stderr_lines(tmp_path):
    """A raw capture of a board restarting every 10 frames (299 resets in 3 s at 1 kHz): stderr has
    one line a second of recorded time, and their counts add up to every reset in the JSON."""
    from protocol.encoder import encode_frames

    rows = 30000 + np.zeros((10, 2), dtype=np.int64)
    capture = tmp_path / "restarts.txt"
    capture.write_bytes(b"".join(encode_frames(rows, 0) for _ in range(300)))
    out = padtune("replay", str(capture), "--json", "--rate", "1000")
    assert out.returncode == 0, out.stderr
    resets = sum(e["count"] for e in links(json_lines(out.stdout), "reset"))
    told = [line for line in out.stderr.splitlines() if "board reset: baselines taken again" in line]
    assert resets == 299 and 2 <= len(told) <= 6, told
    shown = sum(int(m.group(1)) if (m := re.search(r"\(x(\d+) in \d+\.\d s\)$", line)) else 1
                for line in told)
    assert shown == resets


def test_record_on_a_silent_board_says_so_while_recording(tmp_path):
    pty = PtyBoard(tmp_path)
    try:
        out = padtune("record", str(pty.path), "-o", str(tmp_path / "quiet.csv"), "--duration", "2.5")
    finally:
        pty.close()
    assert out.returncode == 0, out.stderr
    assert "padtune: " in out.stderr and "never spoke" in out.stderr and "recorded 0 frames" in out.stderr


def test_check_on_a_silent_socket_blames_no_baud_rate(tmp_path):
    from processing.profile import profile_for, save_profile

    save_profile(profile_for(2, names=("a", "b")), tmp_path / "two.toml")
    bridge = TcpBridge()
    try:
        out = padtune("check", bridge.url, "--profile", str(tmp_path / "two.toml"), "--duration", "0.5",
                      "--no-limits")
    finally:
        bridge.close()
    assert out.returncode == 2, out.stderr  # no data: a setup problem, not a failed unit
    assert "check the bridge and the URL" in out.stderr and "baud" not in out.stdout + out.stderr
