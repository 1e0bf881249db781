"""Every kind of port the link opens, with a board that was already running: a pseudo-terminal, a real
RFC 2217 server (pyserial's PortManager in front of a pty), a plain TCP bridge, and the loop-back.
The board's info line went by before the port opened, so the link asks with `?`; boards that answer
get their names and polarity applied, boards that do not are read all the same. Opening failures of
every kind are one line that names the port."""

from __future__ import annotations

import socket

import pytest

from protocol.encoder import encode_info
from protocol.errors import UserError
from protocol.events import BoardInfo, FaultKind, LinkFault, LinkState
from protocol.link import Link, open_port

from .netserve import Rfc2217Server, TcpBridge
from .ptyboard import Collector, PtyBoard
from .runningboard import PtyEnd, RunningBoard

pytestmark = pytest.mark.e2e

GREETING = encode_info({"proto": 1, "board": "pumphouse", "channels": 2, "rate": 100, "names": "inlet,outlet",
                        "polarity": "-"})
ANSWER = encode_info({"board": "pumphouse", "names": "inlet,outlet", "polarity": "-"})  # no proto


@pytest.fixture
def pty_board(tmp_path):
    board = PtyBoard(tmp_path)
    yield board
    if board.master is not None:
        board.close()


def run_link(url: str, baud: int = 115200) -> tuple[Link, Collector]:
    link = Link(url, baud, backoff_s=(0.05, 0.5))
    got = Collector(link)
    link.start()
    return link, got


def infos(got: Collector) -> list[BoardInfo]:
    return [e for e in got.events if isinstance(e, BoardInfo)]


def consecutive(got: Collector) -> bool:
    seqs = [s for s, _ in got.frames()]
    return seqs == list(range(seqs[0], seqs[0] + len(seqs)))


def test_a_running_board_on_a_pty_is_asked_and_its_answer_applied(pty_board):
    end = PtyEnd(pty_board)
    end.out(GREETING)  # printed before padtune opened: the open flushes it
    board = RunningBoard(end.out, end.inp, answer=ANSWER).start()
    link, got = run_link(str(pty_board.path))
    try:
        got.wait(lambda: infos(got), "the answer to ?")
        (info,) = infos(got)
        assert info.proto is None and not info.new_session  # the answer, not the lost greeting
        assert link.info.names == ("inlet", "outlet") and link.info.polarity == (-1,)
        assert board.heard.count(b"?\n") == 1 and link.stats.extra["info_requests"] == 1
        got.wait(lambda: len(got.frames()) >= 100, "frames after the answer")
        assert consecutive(got) and link.stats.garbled == 0
    finally:
        link.stop()
        board.stop()


def test_a_board_that_ignores_the_question_is_read_all_the_same(pty_board):
    end = PtyEnd(pty_board)
    board = RunningBoard(end.out, end.inp).start()
    link, got = run_link(str(pty_board.path))
    try:
        got.wait(lambda: board.asked_at_seq is not None, "the ? to reach the board")
        asked = board.asked_at_seq
        got.wait(lambda: board.seq >= asked + 100 and len(got.frames()) >= 100, "a second of frames after ?")
        assert board.heard.count(b"?\n") == 1  # asked once, never again
        assert link.info is None and not infos(got) and link.connected
        faults = [e for e in got.events if isinstance(e, LinkFault)]
        assert faults == [], faults  # silence after ? is fine: no fault, no error
        assert consecutive(got)
    finally:
        link.stop()
        board.stop()


def test_rfc2217_url_against_a_real_server_sets_the_remote_rate_and_reads_frames():
    server = Rfc2217Server()
    board = RunningBoard(server.out, server.inp, answer=ANSWER).start()
    link, got = run_link(server.url, 57600)
    try:
        got.wait(lambda: infos(got) and len(got.frames()) >= 100, "frames and the answer over RFC 2217")
        assert server.baudrates[-1] == 57600  # the client set the remote port's rate
        assert link.info.names == ("inlet", "outlet") and consecutive(got)
        assert link.stats.garbled == 0 and not got.faults(FaultKind.BAUD_SUSPECT)
        assert link.write(b"+inlet\n") and b"+inlet\n" in server_heard(board, b"+inlet\n", got)
    finally:
        link.stop()
        board.stop()
        server.close()
    got.poll()
    assert got.states()[-1] is LinkState.CLOSED


def server_heard(board: RunningBoard, want: bytes, got: Collector) -> bytes:
    got.wait(lambda: want in board.heard, f"{want!r} at the board")
    return board.heard


def test_socket_url_reads_a_running_board_behind_a_tcp_bridge():
    bridge = TcpBridge()
    board = RunningBoard(bridge.out, bridge.inp, answer=ANSWER).start()
    link, got = run_link(bridge.url)
    try:
        got.wait(lambda: infos(got) and len(got.frames()) >= 100, "frames and the answer over TCP")
        assert link.info.polarity == (-1,) and consecutive(got)
    finally:
        link.stop()
        board.stop()
        bridge.close()


def test_loop_url_is_never_asked():
    link, got = run_link("loop://")
    try:
        got.wait(lambda: link.stats.extra["stalls"] == 1, "the silence of an empty loop (2 s)")
        assert link.stats.garbled == 0 and "info_requests" not in link.stats.extra  # no `?` echoed back
    finally:
        link.stop()


def closed_port() -> int:
    with socket.create_server(("127.0.0.1", 0)) as s:
        return s.getsockname()[1]  # closed again on leaving: nothing listens there


@pytest.mark.parametrize(("url", "message"), [
    ("socket://127.0.0.1:{closed}", "connection refused; is the server running?"),
    ("rfc2217://127.0.0.1:{closed}", "connection refused; is the server running?"),
    ("socket://localhost", "is not a valid address: give socket://HOST:PORT"),
    ("socket://bridge:port", "is not a valid address"),
    ("rfc2217://:4000", "is not a valid address: give rfc2217://HOST:PORT"),
    ("socket://127.0.0.1:99999", "is not a valid address"),
    ("rfc2217://127.0.0.1:{closed}?bogus=1", "unknown option: 'bogus'"),
    ("loop://?logging=loud", "KeyError"),
    ("alt:///dev/null?class=Nope", "unknown class"),
    ("hwgrep://no-such-adapter-xyz", "no ports found"),
    ("socket://no-such-host.invalid:4000", "no such host"),
])
def test_every_open_failure_is_one_line_naming_the_port(url, message):
    url = url.replace("{closed}", str(closed_port()))
    with pytest.raises(UserError) as err:
        open_port(url, 115200, 0.1)
    text = str(err.value)
    assert message in text and url in text and "\n" not in text, text


def test_rfc2217_url_on_a_plain_tcp_server_says_to_use_socket():
    bridge = TcpBridge()  # speaks no telnet: the RFC 2217 client gives up after its network timeout
    try:
        with pytest.raises(UserError, match=r"does not speak RFC 2217; .* use socket://127\.0\.0\.1:"):
            open_port(f"rfc2217://127.0.0.1:{bridge.port}?timeout=0.3", 115200, 0.1)
    finally:
        bridge.close()
