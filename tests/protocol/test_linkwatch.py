"""The link's per-opening decisions (protocol.linkwatch) on a clock the test moves, through the real
decoder: when to ask the board with `?`, wrong baud rate against unreadable text, and silence."""

from __future__ import annotations

import numpy as np

from protocol.decoder import Decoder
from protocol.encoder import encode_frames, encode_info
from protocol.events import FaultKind
from protocol.linkwatch import LinkWatch, WatchStep


class Opening:
    """A decoder and a watch fed together, as the link's reader does after each read."""

    def __init__(self, port: str = "/dev/ttyACM0", **kw) -> None:
        self.decoder = Decoder()
        self.watch = LinkWatch(port, 115200, **kw)
        self.watch.opened(0.0, self.decoder.stats)
        self.steps: list[WatchStep] = []

    def read(self, data: bytes, t_s: float) -> WatchStep:
        if data:
            self.decoder.feed(data, t_s)
        step = self.watch.feed(data, t_s, self.decoder.stats, self.decoder.first_unreadable)
        self.steps.append(step)
        return step

    def idle(self, until_s: float, start_s: float, every_s: float = 0.05) -> None:
        """Empty reads (the read timeout) from start_s to until_s."""
        for t in np.arange(start_s, until_s + 1e-9, every_s):
            self.read(b"", float(t))

    def faults(self, kind: FaultKind | None = None) -> list:
        return [f for s in self.steps for f in s.faults if kind is None or f.kind == kind]

    def asks(self) -> int:
        return sum(s.ask for s in self.steps)


def frames(n: int, first: int = 0) -> bytes:
    return encode_frames(np.full((n, 2), 1000, dtype=np.int64), first)


def test_asks_once_when_no_info_line_came_within_half_a_second():
    o = Opening()
    o.read(frames(10), 0.1)
    o.idle(0.45, 0.15)
    assert o.asks() == 0
    o.read(frames(10, 10), 0.5)
    assert o.asks() == 1
    o.read(frames(10, 20), 1.0)
    o.idle(3.0, 1.05)
    assert o.asks() == 1 and o.watch.asked == 1  # once per opening, never again


def test_an_info_line_in_time_means_no_question():
    o = Opening()
    o.read(encode_info({"proto": 1, "board": "pumphouse", "channels": 2}) + frames(5), 0.2)
    o.idle(1.0, 0.25)
    assert o.asks() == 0


def test_every_reopening_asks_again():
    o = Opening()
    o.idle(0.6, 0.0)
    assert o.asks() == 1
    o.watch.opened(10.0, o.decoder.stats)  # the board was unplugged and is back
    o.idle(10.6, 10.0)
    assert o.asks() == 2 and o.watch.asked == 2


def test_loop_back_is_never_asked():
    o = Opening("loop://", ask=False)
    o.idle(1.0, 0.0)
    assert o.asks() == 0


def wrong_baud_noise(n: int = 600) -> bytes:
    rng = np.random.default_rng(5)  # what a UART at the wrong rate delivers: framing-error bytes
    return bytes(rng.choice([0x00, 0x80, 0xF8, 0xFE, 0xE0, 0x78, 0x0A], size=n).tolist())


def test_binary_bytes_on_a_serial_port_suggest_the_baud_rate():
    o = Opening()
    o.read(wrong_baud_noise(), 0.5)
    o.idle(2.2, 0.55)
    (fault,) = o.faults()
    assert fault.kind == FaultKind.BAUD_SUSPECT and "baud rate 115200 is probably wrong" in fault.detail
    assert o.watch.baud_suspect and o.watch.baud_checked
    o.idle(5.0, 2.25)
    assert len(o.faults(FaultKind.BAUD_SUSPECT)) == 1 and not o.faults(FaultKind.UNREADABLE)


def test_binary_bytes_on_a_socket_never_blame_a_baud_rate():
    o = Opening("socket://bridge.local:4000", has_baud=False)
    o.read(wrong_baud_noise(), 0.5)
    o.idle(2.2, 0.55)
    (fault,) = o.faults()
    assert fault.kind == FaultKind.UNREADABLE and not o.watch.baud_suspect
    assert "no baud rate" in fault.detail and "rfc2217://" in fault.detail
    assert "probably wrong" not in fault.detail


def test_readable_text_in_no_known_form_is_quoted_with_the_forms_and_the_spec():
    o = Opening()
    text = b"Touch demo v2\r\n" + b"Key state: open, raw=1234 (ok)\r\n" * 30
    o.read(text, 0.3)
    o.idle(2.2, 0.35)
    (fault,) = o.faults(FaultKind.UNREADABLE)
    assert not o.faults(FaultKind.BAUD_SUSPECT) and not o.watch.baud_suspect
    assert "'Touch demo v2'" in fault.detail  # the first line not read, quoted
    assert "name:value" in fault.detail and 'protocol/PROTOCOL.md, section "Plain forms"' in fault.detail
    o.read(b"Key state: open, raw=1234 (ok)\r\n" * 30, 2.5)
    o.idle(6.0, 2.55)
    assert len(o.faults(FaultKind.UNREADABLE)) == 1  # once per opening


def test_a_stream_that_is_read_is_not_diagnosed():
    o = Opening()
    o.read(b"# greenhouse panel booting\n" + frames(50), 0.3)
    o.idle(2.2, 0.35)
    assert o.faults() == []  # (the stall that follows is another matter)


def test_one_banner_line_of_a_slow_board_is_not_a_diagnosis():
    """A board that printed a greeting and prints its readings slowly is still being read."""
    o = Opening()
    o.read(b"Starting touch panel\n", 0.1)
    for t in (1.0, 1.6, 2.2):
        o.idle(t, t - 0.5)
        o.read(b"", t)
    assert not o.faults(FaultKind.UNREADABLE)


def test_lines_that_never_end_get_their_own_advice():
    o = Opening()
    o.read(b"1234 1250 " * 1000, 0.3)  # 10,000 bytes without a line end: over any line limit
    o.idle(2.2, 0.35)
    (fault,) = o.faults(FaultKind.UNREADABLE)
    assert "end its lines" in fault.detail


def test_a_board_that_never_speaks_is_reported_at_2_s_then_as_the_silence_doubles():
    o = Opening()
    o.idle(1.95, 0.0)
    assert o.faults() == []
    o.read(b"", 2.0)
    (first,) = o.faults(FaultKind.SILENT)
    assert first.count == 2 and "never spoke" in first.detail and "/dev/ttyACM0" in first.detail
    o.idle(17.0, 2.05)
    assert [f.count for f in o.faults(FaultKind.SILENT)] == [2, 4, 8, 16]
    assert o.watch.stalls == 1  # one silence, reported four times


def test_a_stall_after_data_says_stalled_and_counts_again():
    o = Opening()
    o.idle(2.0, 0.0)  # never spoke: stall 1
    t = 2.0
    while t < 5.0:  # then streams steadily
        t += 0.05
        o.read(frames(5), t)
    assert len(o.faults(FaultKind.SILENT)) == 1
    o.idle(t + 1.9, t + 0.05)
    assert len(o.faults(FaultKind.SILENT)) == 1
    o.read(b"", t + 2.0)
    last = o.faults(FaultKind.SILENT)[-1]
    assert "stalled" in last.detail and last.count == 2 and o.watch.stalls == 2
