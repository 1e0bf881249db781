"""Like a user: the simulated board through real pseudo-terminals, and the CLI as subprocesses."""

import json
import os
import select
import signal
import subprocess
import sys
import threading
import time
import tty

import numpy as np
import pytest
import serial

from devices.faults import FaultPlan
from devices.simulator import SimBoard
from protocol.decoder import Decoder
from protocol.events import FrameBlock

pytestmark = pytest.mark.e2e


def pump(board: SimBoard, master: int, seconds: float, stop: threading.Event) -> None:
    """Write what the board sends in real time (speed-scaled) into the pty master."""
    end = time.monotonic() + seconds
    while time.monotonic() < end and not stop.is_set():
        data = board.read_due()
        while data:
            _, writable, _ = select.select([], [master], [], 0.5)
            if writable:
                data = data[os.write(master, data):]
        time.sleep(0.005)


def read_all(port: serial.Serial, decoder: Decoder, seconds: float) -> list:
    events = []
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        events += decoder.feed(port.read(port.in_waiting or 1), time.monotonic())
    return events


@pytest.mark.parametrize("board_name, speed", [("greenhouse", 8.0), ("grid64", 1.0)])
def test_board_through_a_real_pty_decodes_with_zero_garbled_lines(board_name, speed):
    master, slave = os.openpty()
    tty.setraw(slave)
    port = serial.Serial(os.ttyname(slave), 115200, timeout=0.05)  # open before any byte is written
    board = SimBoard(board_name, seed=7, speed=speed)
    stop = threading.Event()
    writer = threading.Thread(target=pump, args=(board, master, 1.5, stop), daemon=True)
    try:
        writer.start()
        decoder = Decoder()
        events = read_all(port, decoder, 1.5)
        writer.join(10)
        events += drain_quiet(port, decoder)
    finally:
        stop.set()
        writer.join(5)
        port.close()
        os.close(master)
        os.close(slave)
    s = decoder.stats
    assert s.garbled == s.bad_checksum == s.lost == s.overlong == s.width_mismatch == 0, s
    assert s.frames == board.injected.frames_sent > 100
    assert s.infos == 1 and decoder.info.board == board_name
    reference = Decoder()
    ref_blocks = [e for e in reference.feed(SimBoard(board_name, seed=7).run_for(board.generated_s - 1e-9), 0)
                  if isinstance(e, FrameBlock)]
    got = np.concatenate([e.readings for e in events if isinstance(e, FrameBlock)])
    # the same seed gives the same frames whether paced through a pty or generated at once
    assert np.array_equal(got, np.concatenate([b.readings for b in ref_blocks])[: len(got)])


def test_faults_through_a_real_pty_match_what_was_injected():
    master, slave = os.openpty()
    tty.setraw(slave)
    port = serial.Serial(os.ttyname(slave), 115200, timeout=0.05)
    board = SimBoard("greenhouse", seed=3, speed=10.0, faults=FaultPlan.parse(["drop:0.03", "reset@8"]))
    stop = threading.Event()
    writer = threading.Thread(target=pump, args=(board, master, 1.5, stop), daemon=True)
    try:
        writer.start()
        decoder = Decoder()
        read_all(port, decoder, 1.5)
        writer.join(10)
        drain_quiet(port, decoder)
    finally:
        stop.set()
        writer.join(5)
        port.close()
        os.close(master)
        os.close(slave)
    inj, s = board.injected, decoder.stats
    assert inj.resets == s.resets == 1
    assert inj.dropped > 0 and s.lost <= inj.dropped  # a drop next to the reset hides inside the reset
    assert s.lost >= inj.dropped - 2 and s.garbled == s.bad_checksum == 0


def drain_quiet(port: serial.Serial, decoder: Decoder, quiet_s: float = 0.3) -> list:
    """Read until nothing has arrived for `quiet_s` (a loaded machine may deliver late)."""
    events, last = [], time.monotonic()
    while time.monotonic() - last < quiet_s:
        data = port.read(port.in_waiting or 1)
        if data:
            last = time.monotonic()
            events += decoder.feed(data, last)
    return events


def start_cli(*args: str) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-m", "tui.cli", *args], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)


def test_padtune_sim_serves_a_pty_until_ctrl_c(tmp_path):
    link = tmp_path / "board-tty"
    proc = start_cli("sim", "greenhouse", "--seed", "4", "--speed", "4", "--link", str(link))
    try:
        path = proc.stdout.readline().strip()
        assert path.startswith("/dev/")
        assert os.path.realpath(link) == os.path.realpath(path)
        port = serial.Serial(str(link), 115200, timeout=0.05)
        decoder = Decoder()
        events = read_all(port, decoder, 1.0)
        port.write(b"+zone2\n")
        read_all(port, decoder, 0.3)  # keep reading (a flush would cut a line in half)
        pressed = [e for e in read_all(port, decoder, 0.5) if isinstance(e, FrameBlock)]
        port.close()
    finally:
        proc.send_signal(signal.SIGINT)
        out, err = proc.communicate(timeout=10)
    assert proc.returncode == 0, err
    s = decoder.stats
    assert s.garbled == s.bad_checksum == s.lost == 0 and s.frames > 50
    assert decoder.info.board == "greenhouse"
    idle = np.concatenate([e.readings for e in events if isinstance(e, FrameBlock)])[:20, 1].mean()
    assert np.concatenate([b.readings for b in pressed])[:, 1].mean() - idle > 40
    assert "client connected" in out and "stopped:" in err
    assert not link.exists()  # the symlink goes away with the server


def test_padtune_sim_list_and_mistakes():
    out = subprocess.run([sys.executable, "-m", "tui.cli", "sim", "--list"], capture_output=True, text=True,
                         timeout=60)
    assert out.returncode == 0
    assert {"greenhouse", "pumphouse", "grid64"} <= {line.split()[0] for line in out.stdout.splitlines()}
    bad = subprocess.run([sys.executable, "-m", "tui.cli", "sim", "greenhous"], capture_output=True,
                         text=True, timeout=60)
    assert bad.returncode == 2 and "did you mean greenhouse" in bad.stderr
    assert "Traceback" not in bad.stderr and len(bad.stderr.strip().splitlines()) == 1
    bad = subprocess.run([sys.executable, "-m", "tui.cli", "sim", "greenhouse", "--fault", "melt"],
                         capture_output=True, text=True, timeout=60)
    assert bad.returncode == 2 and "unknown fault" in bad.stderr


def test_padtune_estimate_json_and_plain_text():
    out = subprocess.run([sys.executable, "-m", "tui.cli", "estimate", "--material", "soda-lime-glass",
                          "--thickness-mm", "6", "--pad-mm", "15x15", "--method", "oscillator",
                          "--set", "timing_pf=10", "--json"], capture_output=True, text=True, timeout=60)
    assert out.returncode == 0, out.stderr
    result = json.loads(out.stdout)
    assert result["polarity"] == -1 and result["delta_counts"]["nominal"] < 0
    assert result["finger_pf"]["low"] < result["finger_pf"]["nominal"] < result["finger_pf"]["high"]
    assert result["inputs"]["material"] == "soda-lime-glass" and result["inputs"]["er"] == [7.2, 6.0, 8.0]
    plain = subprocess.run([sys.executable, "-m", "tui.cli", "estimate", "--board", "greenhouse"],
                           capture_output=True, text=True, timeout=60)
    assert plain.returncode == 0 and "SNR (pp)" in plain.stdout
    assert "\x1b[" not in plain.stdout  # piped: plain text, no colour codes
    bad = subprocess.run([sys.executable, "-m", "tui.cli", "estimate", "--thickness-mm", "3"],
                         capture_output=True, text=True, timeout=60)
    assert bad.returncode == 2 and "--material" in bad.stderr and "Traceback" not in bad.stderr


def test_pty_server_sends_only_to_a_client_and_starts_each_connection_cleanly():
    from devices.pty_server import PtyServer

    board = SimBoard("greenhouse", seed=2, speed=6.0)
    server = PtyServer(board)
    stop = threading.Event()
    thread = threading.Thread(target=server.serve, args=(stop.is_set,), daemon=True)
    thread.start()
    try:
        time.sleep(0.3)  # nobody connected: nothing is sent, the board keeps time
        assert server.stats.bytes_sent == 0
        for connection in (1, 2):
            port = serial.Serial(server.path, 115200, timeout=0.05)
            decoder = Decoder()
            events = read_all(port, decoder, 0.6)
            port.write(b"?\n")
            events += read_all(port, decoder, 0.3)
            port.close()
            time.sleep(0.2)
            s = decoder.stats
            assert s.garbled == s.bad_checksum == s.lost == 0 and s.frames > 30, (connection, s)
            assert s.infos == 2  # one on connect, one asked for with ?
            assert not isinstance(events[0], FrameBlock)  # the info line comes before any frame
        assert server.stats.connects == 2
    finally:
        stop.set()
        thread.join(5)
        server.close()
