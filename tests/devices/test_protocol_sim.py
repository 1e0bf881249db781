"""The sim:// pyserial handler: imported directly (an ImportError inside would only say "protocol not
known" through pyserial) and through serial.serial_for_url after devices.register_url_handlers()."""

import time

import numpy as np
import pytest
import serial

import devices
from devices import protocol_sim
from protocol.decoder import Decoder
from protocol.errors import UserError
from protocol.events import FrameBlock


def test_handler_module_imports_and_parses_options():
    board, backlog_s, packet_s = protocol_sim.board_from_url(
        "sim://pumphouse?seed=5&speed=8&fault=drop:0.1&fault=reset@2&checksum=0&script=0&random=12&backlog_s=1"
        "&packet_ms=5")
    assert board.spec.name == "pumphouse" and board.seed == 5 and board.speed == 8
    assert board.faults.drop_rate == 0.1 and board.faults.resets_at_s == (2.0,)
    assert not board.checksum and not board.touches.script and board.touches.random_per_min == 12
    assert backlog_s == 1 and packet_s == 0.005


@pytest.mark.parametrize("url, words", [
    ("sim://", "needs a board"),
    ("sim://greenhouse?sped=2", "option 'sped' is not known"),
    ("sim://greenhouse?seed=x", "seed='x': must be a number"),
    ("sim://greenhouse?checksum=maybe", "use 1 or 0"),
    ("sim://greenhouse?fault=explode", "unknown fault"),
    ("sim://glasshouse", "unknown board"),
    ("sim://greenhouse?packet_ms=5000", "use 0 to 1000 ms"),
    ("sim://greenhouse?seed=-1", "seed -1 is out of range"),
    ("sim://greenhouse?random=nan", "random touches nan per minute is out of range"),
    ("sim://greenhouse?backlog_s=nan", "backlog_s=nan"),
    ("sim://greenhouse?backlog_s=-1", "backlog_s=-1"),
])
def test_bad_urls_are_one_line_errors(url, words):
    with pytest.raises(UserError) as err:
        protocol_sim.board_from_url(url)
    assert words in str(err.value) and "\n" not in str(err.value)


def test_board_file_path_url(tmp_path):
    src = devices.boards.BOARDS_DIR / "greenhouse.toml"
    path = tmp_path / "mine.toml"
    path.write_text(src.read_text())
    board, _, _ = protocol_sim.board_from_url(f"sim://{path}")
    assert board.spec.name == "greenhouse"


def test_serial_for_url_reads_paced_frames_and_takes_key_presses():
    devices.register_url_handlers()
    opened = time.monotonic()
    port = serial.serial_for_url("sim://greenhouse?seed=7&speed=20&script=0", timeout=0.05)
    try:
        assert isinstance(port, protocol_sim.Serial)
        decoder = Decoder()
        blocks = []
        while time.monotonic() - opened < 0.5:
            events = decoder.feed(port.read(port.in_waiting or 1), 0.0)
            blocks += [e for e in events if isinstance(e, FrameBlock)]
        elapsed = time.monotonic() - opened
        frames = decoder.stats.frames
        # board time runs 20x the clock at 60 Hz: frames follow the clock (pacing, not a flood), less at
        # most one 10 ms packet (12 frames) not yet released
        expected = elapsed * 20 * 60
        assert expected * 0.85 - 15 < frames <= expected + 1, (frames, expected)
        assert decoder.stats.garbled == decoder.stats.bad_checksum == decoder.stats.lost == 0
        idle = np.concatenate([b.readings for b in blocks])[:, 0].mean()
        port.write(b"+zone1\n")
        time.sleep(0.2)
        port.reset_input_buffer()
        time.sleep(0.2)
        pressed = [e for e in decoder.feed(port.read(port.in_waiting), 0.0) if isinstance(e, FrameBlock)]
        assert np.concatenate([b.readings for b in pressed])[:, 0].mean() - idle > 40
        port.press("zone1", False)
        assert port.board.held() == []
        port.write(b"?\n")
        assert b"! board=greenhouse" in port.read(port.in_waiting)  # an answer, not a new session
    finally:
        port.close()
    with pytest.raises(serial.PortNotOpenError):
        port.read(1)


def test_read_with_timeout_returns_what_is_due():
    devices.register_url_handlers()
    port = serial.serial_for_url("sim://greenhouse?seed=1", timeout=0.1)
    try:
        port.read(port.in_waiting)
        t0 = time.monotonic()
        data = port.read(100000)  # far more than 0.1 s at 60 Hz
        assert 0.08 < time.monotonic() - t0 < 0.5
        assert 0 < len(data) < 2000
    finally:
        port.close()


def test_bad_url_through_pyserial_is_a_serial_exception_with_the_message():
    devices.register_url_handlers()
    with pytest.raises(serial.SerialException, match="unknown board 'nope'"):
        serial.serial_for_url("sim://nope")


def test_backlog_limit_turns_a_stalled_reader_into_lost_frames():
    devices.register_url_handlers()
    port = serial.serial_for_url("sim://greenhouse?seed=1&speed=100&backlog_s=0.01", timeout=0)
    try:
        time.sleep(0.2)  # 20 s of board time go by unread
        d = Decoder()
        d.feed(port.read(port.in_waiting), 0.0)
        assert port.board.injected.extra.get("overrun", 0) > 600
        assert d.stats.frames < 200
    finally:
        port.close()
