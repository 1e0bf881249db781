"""Section 7 of PROTOCOL.md: command and answer lines, the shared setting rules, the command client."""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from processing.settings import ChannelSettings
from protocol import commands as wire
from protocol.command_client import CommandClient
from protocol.crc import checksum_suffix
from protocol.decoder import Decoder
from protocol.decoder_plain import PlainDecoder
from protocol.events import Answer, FrameBlock

VAL = (">val 3 threshold_counts=30 hysteresis_counts=8 touch_debounce_frames=2 release_debounce_frames=2 "
       "baseline_slow_shift=6 baseline_fast_shift=2 baseline_period_frames=16 stuck_timeout_frames=0 "
       "polarity=+")


def test_the_profile_keys_are_the_wire_keys_and_defaults_agree():
    assert tuple(ChannelSettings.__dataclass_fields__) == wire.SETTING_KEYS
    assert ChannelSettings() == ChannelSettings(**wire.DEFAULTS)


@given(st.fixed_dictionaries({k: st.integers(-3, 300) for k in wire.SETTING_KEYS}))
def test_processing_refuses_exactly_what_the_wire_refuses(values):
    assert ChannelSettings(**values).problems() == wire.settings_problems(values)
    # The period rule against the stdlib's own power-of-two test (math.log2 of an exact power is whole).
    p = values["baseline_period_frames"]
    period_ok = 1 <= p <= 256 and math.log2(p).is_integer()
    assert period_ok == all(k != "baseline_period_frames" for k, _ in wire.settings_problems(values))


def test_value_lines_read_back():
    reply = wire.parse_reply("val", VAL[len(">val "):])
    assert reply.channel == 3 and reply.values["threshold_counts"] == 30 and reply.values["polarity"] == 1
    assert wire.val_line(3, reply.values) == VAL


@pytest.mark.parametrize("text, kind, subject, reason", [
    ("set 2 threshold_counts=40", "ok", "set 2", ""),
    ("get *", "ok", "get *", ""),
    ("keep", "ok", "keep", ""),
    ("set 2: hysteresis_counts: 50 must be below the threshold (40)", "no", "set 2",
     "hysteresis_counts: 50 must be below the threshold (40)"),
    ("frob: unknown command", "no", "frob", "unknown command"),
    ("keep: flash write failed", "no", "keep", "flash write failed"),
])
def test_answers_name_their_command(text, kind, subject, reason):
    reply = wire.parse_reply(kind, text)
    assert (reply.kind, reply.subject, reply.reason) == (kind, subject, reason)


def test_command_lines_are_written_as_section_7_says():
    assert wire.get_line(None) == b"get *\n"
    line = wire.set_line(4, {"threshold_counts": 30, "polarity": -1})
    assert line == b"set 4 threshold_counts=30 polarity=-\n"
    with pytest.raises(ValueError):
        wire.set_line(4, {"threshold": 30})
    with pytest.raises(wire.CommandError, match="given twice"):
        wire.parse_pairs(["threshold_counts=3", "threshold_counts=4"])
    with pytest.raises(wire.CommandError, match="not a decimal"):
        wire.parse_pairs(["threshold_counts=0x10"])
    with pytest.raises(wire.CommandError, match=r"\(5000 digits\) is out of range: must be between 1 and"):
        wire.parse_pairs(["threshold_counts=" + "9" * 5000])  # refused before any conversion
    # A whole number too long to convert is one, out of range: the message says so, with the range.
    with pytest.raises(wire.CommandError) as caught:
        wire.parse_pairs(["threshold_counts=999999999999"])
    assert str(caught.value) == ("threshold_counts: 999999999999 is out of range: must be between 1 "
                                 "and 16777216")


@pytest.mark.parametrize("decoder", [Decoder, PlainDecoder])
def test_answer_lines_are_their_own_events_never_garbage_nor_a_session(decoder):
    d = decoder()
    ok = b">ok get 3"
    data = b"! proto=1 channels=2 settings=1\n@0 5 6\n" + VAL.encode() + b"\n" + ok + checksum_suffix(ok) + \
        b"\n>no frob: unknown command\r\n@1 5 6*" + b"%04X" % 0 + b"\n"
    events = d.feed(data, 2.0)
    answers = [e for e in events if isinstance(e, Answer)]
    assert [(a.kind, a.text) for a in answers] == [("val", VAL[5:]), ("ok", "get 3"),
                                                  ("no", "frob: unknown command")]
    assert d.stats.garbled == 0 and d.stats.infos == 1 and d.stats.extra["answers"] == 3
    assert sum(len(e) for e in events if isinstance(e, FrameBlock)) == 1  # the bad-checksum frame dropped


@pytest.mark.parametrize("decoder", [Decoder, PlainDecoder])
def test_answers_are_not_held_behind_a_plain_form(decoder):
    d = decoder()
    events = d.feed(b"512 498\n513 497\n>ok keep\n", 1.0)
    assert d.holding == 2 and [e.kind for e in events if isinstance(e, Answer)] == ["ok"]


def test_an_answer_with_a_bad_checksum_or_another_word_is_counted_not_taken():
    d = Decoder()
    d.feed(b">ok keep*0000\n>maybe so\n", 1.0)
    assert d.stats.bad_checksum == 1 and d.stats.garbled == 1 and "answers" not in d.stats.extra


# -- the command client --------------------------------------------------------------------------

class Wire:
    """What the client sent, and answers the test makes up."""

    def __init__(self, up: bool = True) -> None:
        self.sent: list[bytes] = []
        self.up = up

    def __call__(self, data: bytes) -> bool:
        if self.up:
            self.sent.append(data)
        return self.up


def answer(text: str, t_s: float = 0.0) -> Answer:
    kind, _, rest = text[1:].partition(" ")
    return Answer(t_s, kind, rest)


def test_a_board_that_never_answers_times_out_once_per_command_and_the_queue_moves_on():
    out = Wire()
    client = CommandClient(out, timeout_s=0.5)
    client.submit(b"get 0")
    client.submit(b"keep\n")
    assert client.poll(0.0) == [] and out.sent == [b"get 0\n"]  # one at a time
    assert client.poll(0.49) == []
    timed = client.poll(0.5)
    assert [r.describe() for r in timed] == ["get 0: failed: no answer within 0.5 s"]
    assert out.sent == [b"get 0\n", b"keep\n"]
    assert client.poll(1.0)[0].status == "failed" and not client.busy


def test_garbage_and_late_answers_never_complete_another_command():
    out = Wire()
    client = CommandClient(out, timeout_s=1.0)
    client.submit(b"set 1 threshold_counts=40")
    client.poll(0.0)
    assert client.feed([answer(">ok get 3"), answer(">ok keep"), answer(VAL)]) == []  # not ours
    assert client.strays == 3 and client.busy
    done = client.feed([answer(">val"), ])  # unreadable while a command waits: it fails, and says so
    assert done[0].status == "failed" and "unreadable answer" in done[0].reason


def test_refusals_and_values_come_back_with_their_command():
    out = Wire()
    client = CommandClient(out)
    client.submit(b"get 3", tag="mine")
    client.submit(b"set 3 hysteresis_counts=90")
    client.submit(b"frob")
    client.poll(0.0)
    got = client.feed([answer(VAL), answer(">ok get 3")])
    assert got[0].applied and got[0].tag == "mine" and got[0].values[0].values["threshold_counts"] == 30
    client.poll(0.1)
    refused = client.feed([answer(">no set 3: hysteresis_counts: 90 must be below the threshold (30)")])
    assert refused[0].describe() == ("set 3 hysteresis_counts=90: refused: hysteresis_counts: 90 must be "
                                     "below the threshold (30)")
    client.poll(0.2)
    assert client.feed([answer(">no frob: unknown command")])[0].reason == "unknown command"


def test_a_board_that_is_not_connected_fails_each_command_at_once():
    client = CommandClient(Wire(up=False))
    client.submit(b"keep")
    assert [r.reason for r in client.poll(0.0)] == ["not sent: the board is not connected"]
    client.submit(b"get *")
    client.submit(b"keep")
    client.poll(0.0)
    assert len(client.cancel("closed")) == 0 and not client.busy


def test_link_post_sends_from_the_writer_thread_and_the_answer_comes_back_as_an_event():
    import time

    import devices
    from protocol.link import Link

    devices.register_url_handlers()
    link = Link("sim://greenhouse?settings=1")
    link.start()
    try:
        assert link.post(b"get 2\n")
        answers: list[Answer] = []
        deadline = time.monotonic() + 30  # generous: a loaded machine
        while time.monotonic() < deadline and not any(a.kind == "ok" for a in answers):
            answers += [e for e in link.drain() if isinstance(e, Answer)]
            time.sleep(0.01)
        assert [(a.kind, a.text.split()[0]) for a in answers] == [("val", "2"), ("ok", "get")]
    finally:
        link.stop()
    assert not link.post(b"keep\n") and "not connected" in link.last_error


# -- answers that take long, come late, or echo other values ---------------------------------------

class LateBoard:
    """A fake board for the client: answers each command `delay_s` after it arrives, in order, one
    `>val` line every `line_s` for a `get *` of `channels`; `echo` changes what `>ok set` echoes."""

    def __init__(self, delay_s: float = 0.0, line_s: float = 0.0, channels: int = 2,
                 echo: dict[str, str] | None = None) -> None:
        self.delay_s, self.line_s, self.channels, self.echo = delay_s, line_s, channels, echo or {}
        self.now_s = 0.0
        self.due: list[tuple[float, str]] = []
        self.sent: list[bytes] = []

    def __call__(self, data: bytes) -> bool:
        self.sent.append(data)
        words = data.decode().split()
        start = max([self.now_s, *(t for t, _ in self.due)]) + self.delay_s  # one command at a time
        if words[0] == "get":
            chosen = range(self.channels) if words[1] == "*" else [int(words[1])]
            for i, c in enumerate(chosen):
                self.due.append((start + i * self.line_s, VAL.replace(">val 3", f">val {c}")))
            self.due.append((start + len(chosen) * self.line_s, f">ok get {words[1]}"))
        else:
            pairs = " ".join(self.echo.get(w, w) for w in words[2:])
            self.due.append((start, f">ok {words[0]} {words[1]} {pairs}"))
        return True

    def run(self, client: CommandClient, until_s: float, step_s: float = 0.05) -> list:
        results = []
        while self.now_s <= until_s and client.busy:
            results += client.poll(self.now_s)
            ready = [a for t, a in self.due if t <= self.now_s]
            self.due = [(t, a) for t, a in self.due if t > self.now_s]
            results += client.feed([answer(a, self.now_s) for a in ready])
            self.now_s += step_s
        return results


def test_a_long_answer_is_waited_for_while_its_lines_keep_coming():
    # 512 channels at 115200 Bd, the answer at a tenth of the rate: one 239-byte line every 20.7 ms,
    # 10.6 s in all, five times the 2 s timeout; the bound (board_link.answer_limit_s) is 34 s.
    from tui.headless.board_link import answer_limit_s

    board = LateBoard(line_s=239 / 11520, channels=512)
    client = CommandClient(board, timeout_s=2.0, limit_s=answer_limit_s(512, 115200))
    client.submit(wire.get_line(None))
    [done] = board.run(client, 60.0, step_s=0.01)
    assert done.applied and len(done.values) == 512 and 10.5 < board.now_s < 11.0


def test_an_answer_that_stops_or_never_ends_fails_in_its_words():
    board = LateBoard(line_s=0.5, channels=8)
    client = CommandClient(board, timeout_s=1.0, limit_s=2.0)
    client.submit(b"get *")
    [done] = board.run(client, 10.0)
    assert done.reason == "the answer did not end within 2 s (4 value lines so far)"
    board = LateBoard(line_s=0.5, channels=8)
    client = CommandClient(board, timeout_s=1.0, limit_s=20.0)
    client.submit(b"get *")
    client.poll(0.0)
    client.feed([answer(VAL)])
    board.due.clear()  # the board stops after one line
    [done] = board.run(client, 10.0)
    assert done.reason == "the answer stopped after 1 value lines (nothing more for 1 s)"


def test_a_late_answer_never_counts_for_the_next_command_with_the_same_name():
    board = LateBoard(delay_s=1.5)  # answers after the client gave up (1 s)
    client = CommandClient(board, timeout_s=1.0)
    client.submit(b"set 0 threshold_counts=40")
    client.submit(b"set 0 threshold_counts=50")
    client.submit(b"get *")
    client.submit(b"get *")
    results = board.run(client, 10.0)
    assert [r.status for r in results] == ["failed"] * 4  # each timed out; no late answer was taken
    # The late `>ok set 0 threshold_counts=40` came while `set 0 threshold_counts=50` waited, and the
    # late answer to that one while the first `get *` waited: both dropped, as owed to timed-out ones.
    assert client.late == 2 and client.strays == 2
    # Once the board answers in time again (the late answers of both gets lost on the way), the next
    # command is its own, and so are its values.
    board.delay_s = 0.0
    board.due.clear()
    client.submit(b"set 0 threshold_counts=60")
    client.submit(b"get *")
    ok_set, ok_get = board.run(client, 20.0)
    assert ok_set.applied and ok_set.reply.values == {"threshold_counts": 60}
    assert ok_get.applied and len(ok_get.values) == 2


def test_stale_values_before_a_late_get_answer_are_dropped_with_it():
    client = CommandClient(LateBoard(), timeout_s=1.0)
    client.submit(b"get *")
    client.submit(b"get *")
    client.poll(0.0)
    [timed] = client.poll(1.0)  # the first gave up; the second is on the wire now
    assert timed.status == "failed"
    assert client.feed([answer(VAL), answer(VAL), answer(">ok get *")]) == []  # the first's, late
    [done] = client.feed([answer(VAL.replace(">val 3", ">val 0")), answer(">ok get *")])
    assert done.applied and [v.channel for v in done.values] == [0]
    # Values followed by an answer that names another command were that command's: never ours.
    client.submit(b"get 0")
    client.poll(2.0)
    assert client.feed([answer(VAL), answer(">ok get 3")]) == []
    [done] = client.feed([answer(VAL.replace(">val 3", ">val 0")), answer(">ok get 0")])
    assert [v.channel for v in done.values] == [0]


def test_an_ok_set_that_echoes_other_values_than_were_sent_is_a_failure_naming_the_key():
    cases = [({"threshold_counts=40": "threshold_counts=41"},
              "threshold_counts: the board says it now holds threshold_counts=41, not threshold_counts=40 as "
              "sent"),
             ({"polarity=-": ""}, "polarity: the board's answer leaves it out (sent polarity=-)"),
             ({"polarity=-": "polarity=- hysteresis_counts=3"},
              "hysteresis_counts: the board's answer names it, but it was not sent")]
    for echo, reason in cases:
        board = LateBoard(echo=echo)
        client = CommandClient(board)
        client.submit(b"set 0 threshold_counts=40 polarity=-")
        [done] = board.run(client, 5.0)
        assert done.status == "failed" and done.reason == reason
    board = LateBoard()
    client = CommandClient(board)
    client.submit(b"set 0 threshold_counts=40 polarity=-")
    assert board.run(client, 5.0)[0].applied
