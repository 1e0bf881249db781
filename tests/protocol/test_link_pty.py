"""End to end through real pseudo-terminals opened with pyserial: frames, unplug and replug, a board
reset, garbage, wrong-baud noise, a slow consumer, host-to-board requests, busy and missing ports."""

import os
import random
import time

import numpy as np
import pytest
import serial

from protocol.encoder import encode_frames, encode_info, encode_note
from protocol.errors import UserError
from protocol.events import FaultKind, LinkState
from protocol.link import Link, open_port

from .ptyboard import Collector, PtyBoard

pytestmark = pytest.mark.e2e

INFO = encode_info({"proto": 1, "board": "greenhouse", "channels": 3, "rate": 100, "names": "z1,z2,stop"})


def frames(first_seq: int, n: int, base: int = 500) -> bytes:
    block = base + np.arange(n * 3, dtype=np.int64).reshape(n, 3)
    return encode_frames(block, first_seq % 65536, checksum=True)


@pytest.fixture
def board(tmp_path):
    b = PtyBoard(tmp_path)
    yield b
    if b.master is not None:
        b.close()


@pytest.fixture
def link_of(board):
    links = []

    def make(**kwargs):
        kwargs.setdefault("backoff_s", (0.05, 0.5))
        link = Link(str(board.path), 115200, **kwargs)
        link.start()
        links.append(link)
        return link, Collector(link)

    yield make
    for link in links:
        link.stop()


def test_frames_info_and_notes_arrive_in_order(board, link_of):
    link, got = link_of()
    got.wait_state(LinkState.CONNECTED)
    board.send(INFO + encode_note("zone 2 wet") + frames(0, 200))
    got.wait(lambda: len(got.frames()) == 200, "200 frames")
    assert [s for s, _ in got.frames()] == list(range(200))
    assert got.frames()[0][1] == (500, 501, 502)
    kinds = [type(e).__name__ for e in got.events if type(e).__name__ != "FrameBlock"]
    assert kinds[:3] == ["LinkStatus", "BoardInfo", "Note"]
    stats = link.stats
    assert stats.frames == 200 and stats.lost == 0 and stats.garbled == 0 and link.connected
    assert link.info.board == "greenhouse"


def test_unplug_and_replug_keeps_the_session(board, link_of):
    link, got = link_of()
    got.wait_state(LinkState.CONNECTED)
    board.send(INFO + frames(0, 50) + b"@50 1 2")  # the last line is cut by the unplug
    got.wait(lambda: len(got.frames()) == 50, "frames before the unplug")
    board.unplug()
    got.wait_state(LinkState.DISCONNECTED)
    got.wait_state(LinkState.RECONNECTING)
    assert not link.connected and not link.write(b"?\n")
    board.plug()
    got.wait_state(LinkState.RECONNECTED)
    board.send(frames(50, 50))
    got.wait(lambda: len(got.frames()) == 100, "frames after the replug")
    assert [s for s, _ in got.frames()] == list(range(100))
    stats = link.stats
    assert stats.frames == 100 and stats.lost == 0 and stats.garbled == 0  # the cut line was not glued on
    assert link.info.board == "greenhouse"  # the session's info survived
    assert got.states() == [LinkState.CONNECTED, LinkState.DISCONNECTED, LinkState.RECONNECTING,
                            LinkState.RECONNECTED]


def test_unplug_twice(board, link_of):
    _link, got = link_of()
    got.wait_state(LinkState.CONNECTED)
    for round_ in range(2):
        board.unplug()
        got.wait_state(LinkState.DISCONNECTED, round_ + 1)
        board.plug()
        got.wait_state(LinkState.RECONNECTED, round_ + 1)
    board.send(frames(0, 5))
    got.wait(lambda: len(got.frames()) == 5, "frames after two replugs")


def test_board_reset_is_counted(board, link_of):
    link, got = link_of()
    got.wait_state(LinkState.CONNECTED)
    board.send(frames(1000, 20) + frames(0, 20))
    got.wait(lambda: len(got.frames()) == 40, "frames around the reset")
    assert link.stats.resets == 1 and link.stats.lost == 0
    assert len(got.faults(FaultKind.RESET)) == 1


def test_garbage_and_lost_frames(board, link_of):
    link, got = link_of()
    got.wait_state(LinkState.CONNECTED)
    garbage = b"\x00\x13 noise\n@@@\n"
    board.send(frames(0, 10) + garbage + frames(15, 10) + b"9" * 9000 + b"\n" + frames(25, 5))
    got.wait(lambda: len(got.frames()) == 25, "frames between garbage")
    stats = link.stats
    # "@@@" looks like a frame without a checksum after checksummed ones: bad_checksum
    assert stats.garbled == 1 and stats.bad_checksum == 1 and stats.overlong == 1 and stats.lost == 5
    assert not link.baud_suspect


def test_wrong_baud_noise_is_reported(board, link_of):
    now = [100.0]  # the link's clock: it moves on only when the noise is in, however loaded the machine
    link, got = link_of(clock=lambda: now[0])
    got.wait_state(LinkState.CONNECTED)
    rng = random.Random(3)  # what a UART at the wrong rate delivers: mostly framing-error bytes
    noise = bytes(rng.choice([0x00, 0x80, 0xF8, 0xFE, 0xE0, 0x78, 0x0A]) for _ in range(3000))
    board.send(noise)
    got.wait(lambda: link.stats.bytes_in == len(noise), "the noise to be read")
    assert not link.baud_suspect  # still inside the first 2 s on the link's clock
    now[0] += 2.5
    got.wait(lambda: bool(got.faults(FaultKind.BAUD_SUSPECT)), "the wrong-baud warning")
    assert link.baud_suspect
    assert "baud rate 115200 is probably wrong" in got.faults(FaultKind.BAUD_SUSPECT)[0].detail


def test_clean_stream_is_not_suspected(board, link_of):
    link, got = link_of()
    got.wait_state(LinkState.CONNECTED)
    board.send(INFO + frames(0, 100))
    got.wait(lambda: link.baud_checked, "the baud verdict (after 2 s)")
    assert not link.baud_suspect and not got.faults(FaultKind.BAUD_SUSPECT)


def test_request_info_reaches_the_board(board, link_of):
    link, got = link_of()
    got.wait_state(LinkState.CONNECTED)
    assert link.request_info()
    assert b"?\n" in board.receive(b"?\n")


def test_slow_consumer_never_grows_memory(board, link_of):
    link, got = link_of(max_queued_frames=100)
    got.wait_state(LinkState.CONNECTED)
    got.events.clear()
    board.send(frames(0, 1000))
    deadline = time.monotonic() + 30
    while link.stats.frames < 1000 and time.monotonic() < deadline:
        time.sleep(0.01)  # not draining: the consumer is "slow"
    assert link.stats.frames == 1000
    assert link.queued_frames <= 100
    got.poll()
    kept = len(got.frames())
    (overflow,) = got.faults(FaultKind.OVERFLOW)
    assert kept == 100 and overflow.count == 900 and link.stats.overflow == 900
    board.send(frames(1000, 10))  # once drained, frames flow again
    got.wait(lambda: len(got.frames()) == 110, "frames after the overflow")


def test_callback_consumer(board):
    seen = []
    link = Link(str(board.path), on_events=seen.extend)
    link.start()
    try:
        board.send(frames(0, 30))
        deadline = time.monotonic() + 30
        while sum(len(e) for e in seen if type(e).__name__ == "FrameBlock") < 30:
            assert time.monotonic() < deadline
            time.sleep(0.01)
        assert link.drain() == []
    finally:
        link.stop()
    assert seen[-1].state is LinkState.CLOSED


def test_stop_ends_the_reader_and_is_idempotent(board, link_of):
    link, got = link_of()
    got.wait_state(LinkState.CONNECTED)
    link.stop()
    link.stop()
    got.poll()
    assert got.states()[-1] is LinkState.CLOSED and got.states().count(LinkState.CLOSED) == 1
    assert not link.running


def test_without_reconnect_the_link_stays_down(board, link_of):
    link, got = link_of(reconnect=False)
    got.wait_state(LinkState.CONNECTED)
    board.unplug()
    got.wait_state(LinkState.DISCONNECTED)
    got.wait(lambda: not link.running, "the reader to end")
    assert link.state is LinkState.DISCONNECTED


def test_missing_port_is_one_line():
    with pytest.raises(UserError, match=r"^port /nonexistent/ttyACM9 not found: is the board plugged in\?"):
        open_port("/nonexistent/ttyACM9", 115200, 0.1)
    with pytest.raises(UserError, match="not found"):
        Link("/nonexistent/ttyACM9").start()


def test_busy_port_is_one_line(board):
    first = open_port(str(board.path), 115200, 0.1)
    try:
        with pytest.raises(UserError, match=r"is busy: another program"):
            open_port(str(board.path), 115200, 0.1)
    finally:
        first.close()


def test_permission_message_mentions_dialout(tmp_path, monkeypatch):
    import errno

    import protocol.opening as opening

    def refuse(*args, **kwargs):
        message = "could not open port /dev/ttyACM0: [Errno 13] Permission denied"
        raise serial.SerialException(errno.EACCES, message)

    monkeypatch.setattr(opening.serial, "serial_for_url", refuse)
    monkeypatch.setattr(opening.sys, "platform", "linux")
    with pytest.raises(UserError) as info:
        open_port("/dev/ttyACM0", 115200, 0.1)
    assert "dialout" in str(info.value) and "\n" not in str(info.value)


@pytest.mark.skipif(os.geteuid() == 0, reason="root may open any file")
def test_permission_for_real(tmp_path):
    path = tmp_path / "ttyFAKE"
    path.write_bytes(b"")
    path.chmod(0)
    with pytest.raises(UserError, match="no permission"):
        open_port(str(path), 115200, 0.1)


@pytest.mark.parametrize(("url", "message"), [
    ("nosuch://x", r"unknown port URL scheme nosuch://"),
    ("", "no port given"),
])
def test_bad_urls(url, message):
    with pytest.raises(UserError, match=message):
        open_port(url, 115200, 0.1)


@pytest.mark.parametrize("baud", [0, -9600, "fast", True])
def test_bad_baud(baud):
    with pytest.raises(UserError, match="baud rate"):
        open_port("loop://", baud, 0.1)


def test_loop_url_round_trip():
    link = Link("loop://", 9600)
    got = Collector(link)
    link.start()
    try:
        got.wait_state(LinkState.CONNECTED)
        assert link.write(INFO + frames(0, 20))
        got.wait(lambda: len(got.frames()) == 20, "frames looped back")
    finally:
        link.stop()
