"""The link's pure parts (event buffer, baud check, ports) and its reconnect logic with fakes:
a USB board that comes back under a new name, and a socket:// server that drops and takes again."""

import socket
import threading
import time

import numpy as np
import pytest
import serial
from serial.tools import list_ports_common

import protocol.ports as ports_module
from protocol.baudcheck import BaudCheck
from protocol.encoder import encode_frames
from protocol.eventbuffer import EventBuffer
from protocol.events import FaultKind, FrameBlock, LinkFault, LinkState, LinkStatus, Note
from protocol.link import Link
from protocol.ports import UsbIdentity, find_usb, list_ports, usb_identity

from .ptyboard import Collector


def block(n, first=0):
    return FrameBlock(np.zeros(n), np.arange(n), np.zeros((n, 2), dtype=np.int64), first)


# -- event buffer ---------------------------------------------------------------------------------
def test_buffer_keeps_order_and_counts():
    buf = EventBuffer(max_frames=10, max_events=10)
    buf.put([block(3), Note(0, "a"), block(4, 3)])
    out = buf.drain()
    assert [type(e).__name__ for e in out] == ["FrameBlock", "Note", "FrameBlock"]
    assert buf.queued_frames == 0 and len(buf) == 0


def test_buffer_drops_newest_frames_behind_one_growing_marker():
    buf = EventBuffer(max_frames=5, max_events=10)
    buf.put([block(3)])
    buf.put([block(4, 3)])
    buf.put([block(6, 7)])
    out = buf.drain()
    assert [len(e) if isinstance(e, FrameBlock) else (e.kind, e.count) for e in out] == [
        3, 2, (FaultKind.OVERFLOW, 8)]
    assert buf.dropped_frames == 8
    buf.put([block(2, 13)])  # room again after the drain
    assert len(buf.drain()[0]) == 2


def test_a_cut_block_keeps_its_board_times_and_states():
    buf = EventBuffer(max_frames=3, max_events=10)
    states = np.array([[0, 1], [2, 3], [1, 0], [3, 2]], dtype=np.int8)
    readings = np.zeros((4, 2), dtype=np.int64)
    buf.put([FrameBlock(np.zeros(4), np.arange(4), readings, 0, np.arange(4), states)])
    kept = buf.drain()[0]
    assert len(kept) == 3 and kept.board_time.tolist() == [0, 1, 2]
    assert np.array_equal(kept.board_states, states[:3])


def test_buffer_bounds_other_events_but_keeps_status():
    buf = EventBuffer(max_frames=5, max_events=2)
    dropped = []
    buf.put([Note(0, str(i)) for i in range(5)] + [LinkStatus(0, LinkState.DISCONNECTED, "p")],
            on_drop=lambda f, e: dropped.append((f, e)))
    out = buf.drain(max_events=10)
    assert [type(e).__name__ for e in out] == ["Note", "Note", "LinkFault", "LinkStatus"]
    assert out[2].kind is FaultKind.DROPPED and out[2].count == 3 and "3 events" in out[2].detail
    assert dropped == [(0, 3)] and buf.dropped_events == 3


def test_a_flood_of_faults_is_merged_by_kind_and_every_count_kept():
    """Issue 13: 100,000 garbled lines behind a full queue were lost without a marker (the summary said
    14,092). Past the bound each kind's first fault takes in the later ones; a rarer kind (a baud
    verdict) still gets its own slot, in order."""
    buf = EventBuffer(max_frames=5, max_events=3)
    buf.put([LinkFault(0, FaultKind.GARBLED, 1, "line 0")] * 3)
    buf.put([LinkFault(1, FaultKind.GARBLED, 1, f"line {i}") for i in range(3, 100_000)])
    buf.put([LinkFault(2, FaultKind.BAUD_SUSPECT, 1, "wrong rate?"), LinkFault(3, FaultKind.GARBLED, 2)])
    out = buf.drain()
    assert [(e.kind, e.count) for e in out] == [(FaultKind.GARBLED, 1)] * 3 + [
        (FaultKind.GARBLED, 100_000 - 3 + 2), (FaultKind.BAUD_SUSPECT, 1)]
    assert sum(e.count for e in out if e.kind is FaultKind.GARBLED) == 100_002
    assert out[3].detail.startswith("line 3 (99997 more garbled reports merged here")
    assert out[4].detail == "wrong rate?" and buf.merged_faults == 99_997 and buf.dropped_events == 0
    buf.put([LinkFault(4, FaultKind.GARBLED)])  # drained: a new tally, not the old one
    assert [(e.kind, e.count) for e in buf.drain()] == [(FaultKind.GARBLED, 1)]


def test_buffer_drain_limit():
    buf = EventBuffer()
    buf.put([Note(0, str(i)) for i in range(5)])
    assert len(buf.drain(2)) == 2 and len(buf.drain()) == 3


# -- baud check ------------------------------------------------------------------------------------
def test_baud_check_bytes_and_window():
    check = BaudCheck(10.0)
    assert check.feed(b"\xf8\x00\x80" * 20, 10.5) is None  # still inside the 2 s window
    assert check.feed(b"", 12.1) is True
    assert "probably wrong" in check.describe(9600) and "60 of 60 bytes" in check.describe(9600)


def test_baud_check_clean_and_too_little_data():
    check = BaudCheck(0.0)
    check.feed(b"@1 100 200*ABCD\n" * 10, 1.0)
    assert check.feed(b"", 2.5) is False
    quiet = BaudCheck(0.0)
    quiet.feed(b"\x00\xff", 1.0)
    assert quiet.feed(b"", 3.0) is False  # two bytes say nothing


def test_baud_check_readable_text_is_not_a_baud_problem():
    """Only the bytes decide: printable lines that do not parse are another diagnosis (linkwatch)."""
    check = BaudCheck(0.0)
    check.feed(b"Sensor ok, reading 1234 (filtered)\r\n" * 20, 1.0)
    assert check.feed(b"", 2.1) is False


# -- ports -----------------------------------------------------------------------------------------
def fake_port(device, vid=None, pid=None, serial_number=None, description="n/a"):
    info = list_ports_common.ListPortInfo(device, skip_link_detection=True)
    info.vid, info.pid, info.serial_number, info.description = vid, pid, serial_number, description
    return info


@pytest.fixture
def comports(monkeypatch):
    current = []
    monkeypatch.setattr(ports_module._list_ports, "comports", lambda: list(current))
    return current


def test_list_ports_and_vid_pid(comports):
    comports[:] = [fake_port("/dev/ttyACM1", 0x2E8A, 0x000A, "E66", "Pico"), fake_port("/dev/ttyS0")]
    got = list_ports()
    assert [p.device for p in got] == ["/dev/ttyACM1", "/dev/ttyS0"]
    assert got[0].vid_pid == "2E8A:000A" and got[0].description == "Pico"
    assert got[1].vid_pid == "" and got[1].description == ""
    assert got[0].as_dict()["vid_pid"] == "2E8A:000A"


def test_usb_identity_and_find(comports):
    comports[:] = [fake_port("/dev/ttyACM0", 0x1209, 0x0001, "A1")]
    ident = usb_identity("/dev/ttyACM0")
    assert ident == UsbIdentity(0x1209, 0x0001, "A1")
    comports[:] = [fake_port("/dev/ttyACM3", 0x1209, 1, "A1"), fake_port("/dev/ttyACM2", 0x1209, 1, "B2")]
    assert find_usb(ident) == "/dev/ttyACM3"
    twins = UsbIdentity(0x1209, 0x0002, None)
    comports[:] = [fake_port("/dev/ttyACM0", 0x1209, 0x0002), fake_port("/dev/ttyACM1", 0x1209, 0x0002)]
    assert find_usb(twins) is None  # two boards without serial numbers: no guessing
    comports[:] = [fake_port("/dev/ttyACM1", 0x1209, 0x0002)]
    assert find_usb(twins) == "/dev/ttyACM1"


# -- reconnect with fakes --------------------------------------------------------------------------
class FakeSerial:
    """Stands where pyserial's Serial stands; `unplug()` makes the next read fail like a real one."""

    def __init__(self, device, timeout_s):
        self.device, self.timeout_s = device, timeout_s
        self.buf = bytearray()
        self.cond = threading.Condition()
        self.unplugged = False
        self.closed = False
        self.written = bytearray()

    @property
    def in_waiting(self):
        return len(self.buf)

    def read(self, n):
        with self.cond:
            if not self.buf and not self.unplugged:
                self.cond.wait(self.timeout_s)
            if self.unplugged:
                raise serial.SerialException("device reports readiness to read but returned no data")
            out = bytes(self.buf[:n])
            del self.buf[:n]
            return out

    def feed(self, data):
        with self.cond:
            self.buf += data
            self.cond.notify_all()

    def unplug(self):
        with self.cond:
            self.unplugged = True
            self.cond.notify_all()

    def write(self, data):
        self.written += data
        return len(data)

    def close(self):
        self.closed = True


def test_usb_board_comes_back_under_a_new_name(tmp_path, comports):
    first, second = tmp_path / "ttyACM0", tmp_path / "ttyACM1"
    first.touch()
    comports[:] = [fake_port(str(first), 0x1209, 0x7D00, "GH-01")]
    opened = []

    def opener(device, baud, timeout_s):
        if not (tmp_path / device).exists():
            raise AssertionError("the link tried a path that is not there")
        opened.append(FakeSerial(device, timeout_s))
        return opened[-1]

    link = Link(str(first), opener=opener, backoff_s=(0.02, 0.1))
    got = Collector(link)
    link.start()
    try:
        opened[0].feed(encode_frames(np.ones((5, 2)), 0))
        got.wait(lambda: len(got.frames()) == 5, "frames before")
        first.unlink()
        comports[:] = []
        opened[0].unplug()
        got.wait_state(LinkState.RECONNECTING)
        assert opened[0].closed
        second.touch()
        comports[:] = [fake_port(str(second), 0x1209, 0x7D00, "GH-01")]
        got.wait_state(LinkState.RECONNECTED)
        status = [e for e in got.events if isinstance(e, LinkStatus)][-1]
        assert f"now at {second}" in status.detail and link.device == str(second)
        opened[1].feed(encode_frames(np.ones((5, 2)), 5))
        got.wait(lambda: len(got.frames()) == 10, "frames after")
        assert link.stats.lost == 0
        # (the link may have asked by itself already: no info line came within 0.5 s of reopening)
        assert link.request_info() and bytes(opened[1].written).endswith(b"?\n")
    finally:
        link.stop()


def test_vanished_device_path_counts_as_unplugged(tmp_path, comports):
    path = tmp_path / "ttyUSB0"
    path.touch()
    fakes = []

    def opener(device, baud, timeout_s):
        fakes.append(FakeSerial(device, timeout_s))
        return fakes[-1]

    link = Link(str(path), opener=opener, backoff_s=(0.02, 0.1))
    got = Collector(link)
    link.start()
    try:
        path.unlink()  # reads just time out, but the device node is gone
        got.wait_state(LinkState.DISCONNECTED)
        assert "vanished" in [e for e in got.events if isinstance(e, LinkStatus)][-1].detail
        path.touch()
        got.wait_state(LinkState.RECONNECTED)
    finally:
        link.stop()


def test_socket_url_drop_and_retake():
    """A board behind a TCP bridge streams; the bridge drops the connection and takes the next one."""
    server = socket.create_server(("127.0.0.1", 0))
    port = server.getsockname()[1]
    drop, done = threading.Event(), threading.Event()
    seq = [0]

    def stream(conn, until):
        # Stream like a board: pyserial's open() discards what arrived before it finished, so a
        # one-shot burst right after accept() could vanish; a stream cannot.
        while not until.is_set():
            conn.sendall(encode_frames(np.full((1, 2), 7), seq[0] % 65536))
            seq[0] += 1
            time.sleep(0.005)
        conn.close()

    def serve():
        for until in (drop, done):
            conn, _ = server.accept()
            stream(conn, until)

    thread = threading.Thread(target=serve, daemon=True)
    thread.start()
    link = Link(f"socket://127.0.0.1:{port}", backoff_s=(0.05, 0.2))
    got = Collector(link)
    link.start()
    try:
        got.wait(lambda: len(got.frames()) >= 5, "frames over the first connection")
        drop.set()
        got.wait_state(LinkState.RECONNECTED)
        before = len(got.frames())
        got.wait(lambda: len(got.frames()) >= before + 5, "frames over the second connection")
        assert got.states()[:4] == [LinkState.CONNECTED, LinkState.DISCONNECTED, LinkState.RECONNECTING,
                                    LinkState.RECONNECTED]
        seqs = [s for s, _ in got.frames()]
        assert seqs == sorted(seqs) and link.stats.resets == 0  # the session's numbering carried on
    finally:
        done.set()
        link.stop()
        thread.join(10)
        server.close()


def test_callback_errors_are_counted_not_fatal(tmp_path):
    path = tmp_path / "tty"
    path.touch()
    fake = FakeSerial(str(path), 0.05)
    calls = []

    def bad_consumer(events):
        calls.append(events)
        raise RuntimeError("consumer bug")

    link = Link(str(path), opener=lambda *a: fake, on_events=bad_consumer)
    link.start()
    try:
        fake.feed(encode_frames(np.ones((3, 2)), 0))
        deadline = time.monotonic() + 30
        while link.stats.frames < 3 and time.monotonic() < deadline:
            time.sleep(0.01)
        assert link.stats.extra["callback_errors"] >= 2 and link.running
    finally:
        link.stop()


def test_link_fault_is_hashable_small_dataclass():
    fault = LinkFault(0.0, FaultKind.BAUD_SUSPECT, 1, "x")
    assert fault.kind == "baud_suspect"


def test_timestamps_and_baud_window_use_the_given_clock(tmp_path):
    path = tmp_path / "tty"
    path.touch()
    fake = FakeSerial(str(path), 0.02)
    now = [1000.0]
    link = Link(str(path), opener=lambda *a: fake, clock=lambda: now[0])
    got = Collector(link)
    link.start()
    try:
        fake.feed(b"\xf8\x00\xfe\x80" * 40 + b"\n")  # wrong-baud noise, inside the window
        got.wait(lambda: link.stats.bytes_in == 161, "the noise to be read")
        assert not link.baud_suspect  # the window has not passed on this clock
        now[0] = 1002.5
        got.wait(lambda: link.baud_suspect, "the verdict once the clock passed 2 s")
        fake.feed(encode_frames(np.ones((2, 2)), 0))
        got.wait(lambda: len(got.frames()) == 2, "frames")
        (frames_block,) = [e for e in got.events if isinstance(e, FrameBlock)]
        assert frames_block.t_s.tolist() == [1002.5, 1002.5]
        assert got.events[0].t_s == 1000.0  # the connected status
    finally:
        link.stop()
