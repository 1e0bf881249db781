"""Self-test of the acceptance emulators, read through pyserial directly (no padtune code at all).

If an acceptance test fails, it must be because padtune lacks the feature, not because a board printed
something other than what it claims. So every board is played on a real pseudo-terminal (and through a
socket and the RFC 2217 server) and read back with pyserial; each line is parsed here with a small parser
of that form written for this test, and must give exactly the values the board model says, with the
exact line ends, text lines where they belong, `?` answered, the time column rising. The scripts are
checked against what the contract asks of a test board (quiet first, depth against noise).
"""

from __future__ import annotations

import contextlib
import decimal
import itertools
import re
import time
from decimal import Decimal

import pytest
import serial

from tests.acceptance.boards import RAMP_FRAMES, Board, crc_line
from tests.acceptance.scenarios import BOARDS, SCENARIOS
from tests.acceptance.wire import Player, PtyWire, make_wire

pytestmark = pytest.mark.e2e
SPEED = 25.0  # play 25 times faster than life: values do not depend on timing
WAIT_S = 30.0

INT = r"-?\d+"
# One parser per form, written from the form's C line in boards.py (not from boards.py's Python).
PARSERS = {
    "columns": lambda s: [int(x) for x in s.split()],
    "commas": lambda s: [int(x) for x in s.split(",")],
    "tabs": lambda s: [int(x) for x in s.rstrip("\t").split("\t")],
    "pairs": lambda s: re.findall(rf"([A-Za-z][\w$]*)[:=]\[? *({INT})\]?", s),
    "decimals": lambda s: [int(Decimal(x) * 100) for x in s.rstrip("\t").split("\t")],
    "sequenced": lambda s: [int(x) for x in re.fullmatch(r"@\d+ ([-\d ]+)\*[0-9A-F]{4}", s).group(1).split()],
}
FORM_OF = {"columns": "columns", "fixed6": "columns", "cr_only": "columns", "commas": "commas",
           "chatty": "commas", "rc_falling": "tabs", "rc_known": "tabs", "decimals": "decimals",
           "plotter_pairs": "pairs", "spaced_pairs": "pairs", "equals_pairs": "pairs", "brackets": "pairs",
           "big": "pairs", "esp32_72": "columns", "millis": "columns", "millis_pairs": "pairs",
           "invalid_name": "columns", "mixed_polarity": "columns", "running": "sequenced",
           "wide512": "sequenced", "slow": "columns", "stall": "columns"}


def read_all(port: serial.SerialBase, player: Player, lines: int | None = None) -> bytes:
    """Read until the board has printed everything and `lines` line ends have arrived (None: until
    nothing more arrives for 0.3 s after the board finished)."""
    got = bytearray()
    deadline = time.monotonic() + WAIT_S
    last_news = time.monotonic()
    while time.monotonic() < deadline:
        chunk = port.read(port.in_waiting or 1)
        if chunk:
            got += chunk
            last_news = time.monotonic()
        if player.finished.is_set():
            if lines is not None and got.count(player.board.eol) >= lines:
                break
            if lines is None and time.monotonic() - last_news > 0.3:
                break
    assert player.error is None, player.error
    return bytes(got)


def expected_lines(board: Board) -> int:
    return len(board.boot) + sum(len(t) for t in board.texts.values()) + board.frames


def play(board: Board, kind: str = "pty", write: bytes = b"") -> tuple[bytes, Player]:
    wire = make_wire(kind)
    player = Player(board, wire, speed=SPEED)
    player.start()
    try:
        with serial.serial_for_url(wire.url, baudrate=115200, timeout=0.05) as port:
            player.go.set()
            if write:
                port.write(write)
            data = read_all(port, player, expected_lines(board))
            if isinstance(wire, PtyWire):
                assert wire.unread() == 0
        return data, player
    finally:
        player.stop()
        wire.close()


def split(board: Board, data: bytes) -> tuple[list[str], list[str]]:
    """(data lines, text lines) of what arrived: every line ends exactly with the board's line end, and
    the text lines are where the board's script puts them (boot lines first, then before frame k)."""
    assert data.endswith(board.eol) or not data, data[-20:]
    parts = [p.decode("ascii") for p in data.split(board.eol)[:-1]]
    assert all("\r" not in p and "\n" not in p for p in parts), "a line end inside a line"
    texts = parts[:len(board.boot)]
    rest = parts[len(board.boot):]
    lines = []
    for frame in range(board.frames):
        n = len(board.texts.get(frame, ()))
        texts += rest[:n]
        lines.append(rest[n])
        rest = rest[n + 1:]
    assert not rest
    return lines, texts


@pytest.mark.parametrize("name", sorted(FORM_OF))
def test_every_form_prints_the_model_values(name):
    board = BOARDS[name]
    if board.running:
        board = Board(**{**board.__dict__, "running": False})  # here: from frame 0, like the others
    data, player = play(board)
    assert data == board.boot_bytes() + b"".join(board.lines(k) for k in range(board.frames))  # no loss
    lines, others = split(board, data)
    assert len(lines) == board.frames == player.sent
    parse = PARSERS[FORM_OF[name]]
    for frame, line in enumerate(lines):
        got = parse(line)
        want = board.values(frame)
        if FORM_OF[name] == "pairs":
            names = [n for n, _ in got]
            values = [int(v) for _, v in got]
            if name == "millis_pairs":
                assert names[0] == "time" and values[0] == board.millis(frame)
                names, values = names[1:], values[1:]
            assert names == list(board.keys) and values == want, (frame, line)
        elif name == "millis":
            assert got == [board.millis(frame), *want], (frame, line)
        else:
            assert got == want, (frame, line)
    # Text lines: exactly the boot lines and those scripted before a data line, in order; none of them
    # reads as a line of the board's own form.
    want_text = list(board.boot) + [t for k in sorted(board.texts) for t in board.texts[k]]
    assert others == want_text
    for text in others:
        with contextlib.suppress(ValueError, AttributeError, decimal.InvalidOperation):
            assert not parse(text), text


def test_forms_look_as_the_issue_shows_them():
    """The exact shapes the issue quotes: brackets, %6d columns, decimals, CR-only ends, time column."""
    assert re.fullmatch(r"T0:\[ {1,2}\d{3,4}\] T2:\[ {1,2}\d{3,4}\] T3:\[ {1,2}\d{3,4}\] \n",
                        BOARDS["brackets"].data_line(0).decode())
    assert re.fullmatch(r"( {2}\d{4}){3}\n", BOARDS["fixed6"].data_line(0).decode())
    assert re.fullmatch(r"(\d{4,}\.\d\d\t){3}\r\n", BOARDS["decimals"].data_line(0).decode())
    assert BOARDS["cr_only"].data_line(0).endswith(b" \r") and b"\n" not in BOARDS["cr_only"].data_line(0)
    assert re.fullmatch(r"(zone\d:\d+,){2}zone3:\d+\r\n", BOARDS["plotter_pairs"].data_line(0).decode())
    assert re.fullmatch(r"(\w+:\d+ ){3}\n", BOARDS["spaced_pairs"].data_line(0).decode())
    millis = BOARDS["millis"]
    steps = [millis.millis(k + 1) - millis.millis(k) for k in range(millis.reset_at - 1)]
    assert min(steps) >= 9 and max(steps) <= 11  # strictly and steadily rising: 10 ms a frame, +-1
    assert millis.millis(millis.reset_at) < millis.millis(millis.reset_at - 1)  # the reset goes back
    wide = BOARDS["wide512"]
    line = wide.data_line(wide.frames - 1)
    assert len(wide.values(0)) == 512 and 1024 < len(line) <= 8192
    assert all(-(2**31) <= v < 2**31 for f in (0, 130) for v in wide.values(f))
    # The emulators' checksum: CRC-16/IBM-3740's check value from the published catalogue of parametrised
    # CRC algorithms (the CRC of "123456789" is 0x29B1), so a board's `*HHHH` is right by an outside measure.
    assert crc_line("123456789") == "123456789*29B1"
    assert BOARDS["flood"].data_line(5) == BOARDS["flood"].data_line(6) == b"@42 1000 1020 990*9E47\r\n"
    assert BOARDS["silent"].frames == 0 and BOARDS["binary"].data_line(0)[:24].count(b"\x00") < 24


@pytest.mark.parametrize("name", sorted(n for n, b in BOARDS.items() if b.touches))
def test_scripts_are_what_the_contract_asks_of_a_test_board(name):
    board = BOARDS[name]
    # Contract 7: quiet for at least 2 s after the port opens (a running board: after it gets `?`).
    assert min(t.start for t in board.touches) >= 2.0 * board.rate_hz
    # Contract 7: detected from 10 times the quiet noise peak-to-peak; the noise is bounded by 2 * noise.
    assert board.depth >= 10 * 2 * board.noise
    quiet = [board.values(k) for k in range(min(t.start for t in board.touches))]
    for key, idle in enumerate(board.idle):
        column = [v[key] for v in quiet]
        assert max(column) - min(column) <= 2 * board.noise
        assert abs(sum(column) / len(column) - idle) <= board.noise
    for t in board.touches:  # fully down in the middle of each touch, in the key's direction
        mid = board.values(t.start + RAMP_FRAMES)[t.key] - board.idle[t.key]
        assert abs(mid - board.polarity[t.key] * board.depth) <= board.noise
        assert t.end + RAMP_FRAMES <= board.frames  # lifted before the board stops
        after = board.values(t.end + RAMP_FRAMES)[t.key] - board.idle[t.key]
        assert abs(after) <= board.noise
    # A key's touches are apart by at least 1.4 s (a teaching touch settles before the next one).
    for key in range(len(board.idle)):
        mine = sorted((t for t in board.touches if t.key == key), key=lambda t: t.start)
        for a, b in itertools.pairwise(mine):
            assert b.start - a.end >= 1.4 * board.rate_hz


def test_text_lines_and_the_question_on_a_pty():
    data, player = play(BOARDS["chatty"], write=b"?\n")
    lines, others = split(BOARDS["chatty"], data)
    assert others[:5] == list(BOARDS["chatty"].boot)
    assert "calibrating..." in others and len(lines) == BOARDS["chatty"].frames
    assert player.host_lines == [b"?"] and len(player.asks) == 1  # heard; this board does not answer


@pytest.mark.parametrize("kind", ["socket", "rfc2217"])
def test_network_wires_carry_the_board_both_ways(kind):
    board = BOARDS["commas"]
    data, player = play(board, kind, write=b"?\n")
    lines, _ = split(board, data)
    assert [PARSERS["commas"](x) for x in lines] == [board.values(k) for k in range(board.frames)]
    assert player.host_lines == [b"?"]  # through the RFC 2217 server's filter to the pty, too


def test_a_running_board_answers_and_counts_its_script_from_the_question():
    """Opened late: what it printed before is flushed or torn; `?` gets the info line without proto at
    once, and the touches start 200 frames after the question."""
    board = BOARDS["running"]
    wire = PtyWire()
    player = Player(board, wire, speed=SPEED)
    player.start()
    try:
        time.sleep(0.3)  # it prints (and drops what the full pty cannot hold) before anyone opens it
        with serial.Serial(wire.url, timeout=0.05) as port:  # pyserial's open flushes the input
            time.sleep(0.05)
            port.write(b"?\n")
            data = read_all(port, player)
    finally:
        player.stop()
        wire.close()
    assert player.anchor is not None and len(player.asks) == 1
    text = data.decode("ascii", "replace")
    assert board.answer + "\r\n" in text and "proto=" not in text.split(board.answer)[0][-200:]
    frames = [line for line in text.split("\r\n") if re.fullmatch(r"@\d+ [-\d ]+\*[0-9A-F]{4}", line)]
    numbers = [int(line[1:].split()[0]) for line in frames]
    assert numbers == list(range(numbers[0], numbers[0] + len(numbers)))  # whole frames after the cut
    assert numbers[-1] + 1 == player.anchor + board.frames
    assert player.written[-len(numbers):] == numbers  # the last frames written are the ones read
    first_touch = min(t.start for t in player.board.touches)
    assert first_touch == player.anchor + 200


def test_scenarios_name_their_boards():
    assert all(s.board is not None or s.url for s in SCENARIOS.values())
