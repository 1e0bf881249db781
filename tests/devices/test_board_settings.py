"""The simulated boards' side of PROTOCOL.md section 7: get, set, keep, and what survives a restart."""

from __future__ import annotations

import os
from pathlib import Path

from hypothesis import given, settings
from hypothesis import strategies as st

from devices.board_settings import Flash
from devices.faults import FaultPlan
from devices.simulator import SimBoard
from protocol.decoder import Decoder
from protocol.events import Answer, BoardInfo


def answers(board: SimBoard, *lines: bytes) -> list[str]:
    board.take()
    for line in lines:
        board.write(line)
    return [f">{e.kind} {e.text}" for e in Decoder().feed(board.take(), 0.0) if isinstance(e, Answer)]


def threshold(board: SimBoard, channel: int) -> int:
    vals = answers(board, b"get %d\n" % channel)
    return int(vals[0].split("threshold_counts=")[1].split()[0])


def test_the_info_line_says_settings_1_unless_the_board_does_not_take_commands():
    infos = [e for e in Decoder().feed(SimBoard("greenhouse").take(), 0.0) if isinstance(e, BoardInfo)]
    assert infos[0].fields["settings"] == "1"
    old = [e for e in Decoder().feed(SimBoard("greenhouse", settings=False).take(), 0.0)
           if isinstance(e, BoardInfo)]
    assert "settings" not in old[0].fields


def test_set_is_all_or_none_and_answers_with_the_values_in_force():
    board = SimBoard("pumphouse")
    assert answers(board, b"set * threshold_counts=50 hysteresis_counts=60\n") == [
        ">no set *: hysteresis_counts: 60 must be below the threshold (50), or the key could never release"]
    assert threshold(board, 0) == 30  # nothing changed
    assert answers(board, b"set 1   hysteresis_counts=5\r\n") == [">ok set 1 hysteresis_counts=5"]
    assert answers(board, b"set 1 polarity=- threshold_counts=25\n") == [
        ">ok set 1 polarity=- threshold_counts=25"]
    assert threshold(board, 1) == 25 and threshold(board, 0) == 30


def test_every_command_gets_exactly_one_final_answer_after_its_values():
    board = SimBoard("greenhouse")
    got = answers(board, b"get *\n", b"keep now\n", b"set 99 threshold_counts=1\n", b"???\n")
    finals = [a for a in got if not a.startswith(">val")]
    assert len(got) - len(finals) == board.spec.channels
    assert finals == [">ok get *", ">no keep: takes no arguments",
                      ">no set 99: channel: no channel 99 (channels are 0..8)", ">no ???: unknown command"]


def test_kept_settings_survive_a_watchdog_reset_and_a_power_cycle_unkept_ones_do_not():
    board = SimBoard("greenhouse", faults=FaultPlan.parse(["reset@1"]))
    answers(board, b"set 0 threshold_counts=41\n", b"keep\n", b"set 0 threshold_counts=77\n")
    assert threshold(board, 0) == 77
    board.run_for(2.0)  # the watchdog reset at 1 s: RAM is gone, the kept value comes back
    assert board.injected.resets == 1 and threshold(board, 0) == 41
    answers(board, b"set 2 threshold_counts=66\n")
    board.power_cycle()
    assert threshold(board, 0) == 41 and threshold(board, 2) == 30


def test_a_flash_file_carries_kept_settings_to_the_next_board(tmp_path):
    image = tmp_path / "gh.flash"
    first = SimBoard("greenhouse", flash=Flash(image))
    assert answers(first, b"set 3 touch_debounce_frames=7\n", b"keep\n")[-1] == ">ok keep"
    second = SimBoard("greenhouse", flash=Flash(image))
    assert "touch_debounce_frames=7" in answers(second, b"get 3\n")[0]
    image.write_text("{ not json")  # an unreadable image reads as erased, as a board's would
    assert "touch_debounce_frames=2" in answers(SimBoard("greenhouse", flash=Flash(image)), b"get 3\n")[0]


def test_a_keep_that_cannot_be_stored_is_refused_with_the_reason(tmp_path):
    folder = tmp_path / "ro"
    folder.mkdir()
    board = SimBoard("greenhouse", flash=Flash(folder / "gh.flash"))
    os.chmod(folder, 0o500)
    try:
        if os.access(folder, os.W_OK):  # root writes anywhere
            return
        got = answers(board, b"keep\n")
    finally:
        os.chmod(folder, 0o700)
    assert got[0].startswith(">no keep: flash write failed: ")


def test_the_sim_factory_settings_are_the_demo_profile_s():
    from devices.board_settings import SIM_FACTORY
    from tui.demo_profile import DEMO_SETTINGS

    assert {k: getattr(DEMO_SETTINGS, k) for k in SIM_FACTORY} == SIM_FACTORY


def test_the_exchange_in_protocol_md_section_7_is_what_a_simulated_board_answers():
    from devices.board_settings import BoardSettings
    from protocol.commands import parse_command

    text = (Path(__file__).resolve().parents[2] / "protocol" / "PROTOCOL.md").read_text()
    start = text.index("**An exchange**")
    block = [line[4:] for line in text[start:text.index("**The rules of a setting**")].splitlines()
             if line.startswith("    ")]
    assert block[0].startswith("! proto=1") and "settings=1" in block[0]
    board = BoardSettings(channels=2, polarity=1)
    expected: list[str] = []
    got: list[str] = []
    for line in block[1:]:
        if line.startswith("host: "):
            got += board.answer(parse_command(line[len("host: "):]))
        else:
            expected.append(line)
    assert got == expected


# -- host lines as the C board reads them (devices/firmware/pt_cmd.c) -------------------------------

def finals(lines: list[str]) -> list[str]:
    """Answers with each `>val` line cut to its channel (the boards' factory values differ)."""
    return [" ".join(a.split()[:2]) if a.startswith(">val ") else a for a in lines]


HOSTILE = (b"get 0\rget 1\r\nget 0\n\r\n  \t \n\tget 0  \r\n"  # line ends of every kind, blank lines
           b"get 0\xff\nget 0\x00\n\xff\xfeset 0 threshold_counts=40\nge\x1bt 1\n"  # not ASCII text
           b"get\x1c1\nget\xc2\xa01\nget\t1\nget 01\nset 002 polarity=+\n"  # only spaces and tabs split
           + b"x" * 300 + b" set 0 threshold_counts=99\r\n"  # overlong: the tail is no command
           + b"set 0 " + b"threshold_counts=40 " * 40 + b"\nfrob\n\x00\n")


def test_the_sim_reads_host_lines_exactly_as_the_c_board_does():
    """Reference: the C parser itself (devices/firmware/pt_cmd.c through its harness), fed the same bytes."""
    from tests.firmware import c_build

    c_build.require_cc()
    board = SimBoard("pumphouse", seed=1)
    out = c_build.run(c_build.harness(), ["--frames", "0", "--channels", str(board.spec.channels)], HOSTILE)
    c_answers = [f">{e.kind} {e.text}" for e in Decoder().feed(out, 0.0) if isinstance(e, Answer)]
    sim_answers = answers(board, HOSTILE)
    assert finals(sim_answers) == finals(c_answers)
    assert threshold(board, 0) == 30  # neither the overlong line's tail nor a binary line was applied


def test_bytes_that_are_not_ascii_text_are_refused_and_the_board_goes_on():
    board = SimBoard("pumphouse", seed=1)
    assert answers(board, b"get 0\xff\n") == [">no get: not ASCII text"]
    assert answers(board, b"get 0\x00\n") == [">no get: not ASCII text"]
    assert answers(board, b"get\x1c1\n", "get\u00a01\n".encode()) == [">no get?1: not ASCII text",
                                                                       ">no get??1: not ASCII text"]
    assert answers(board, b"\x00\n") == [">no ?: not ASCII text"]
    assert answers(board, b"get 01\n")[-1] == ">ok get 1"  # the channel named as the C board names it
    board.command("get\u20281")  # a caller of `command` with text no host could send: refused too
    assert [e.text for e in Decoder().feed(board.take(), 0.0) if isinstance(e, Answer)] == [
        "get?1: not ASCII text"]
    assert len(answers(board, b"get 1\n")) == 2


def test_cr_and_crlf_end_a_line_once_and_blank_lines_get_no_answer():
    board = SimBoard("pumphouse", seed=1)
    assert finals(answers(board, b"get 1\r")) == [">val 1", ">ok get 1"]
    assert finals(answers(board, b"get 1\r", b"\n", b"get 2\r\n\r\n\n")) == [
        ">val 1", ">ok get 1", ">val 2", ">ok get 2"]


def test_an_overlong_line_is_refused_once_and_its_tail_never_runs():
    board = SimBoard("pumphouse", seed=1)
    got = answers(board, b"x" * 300 + b" set 0 threshold_counts=99\n")
    assert got == [">no xxxxxxxxxxxxxxxx: line too long"]
    assert threshold(board, 0) == 30
    for _ in range(100):  # 100 kB without a line end: memory stays at the line buffer
        board.write(b"set 0 threshold_counts=77 " * 40)
        assert len(board._commands) <= 256
    assert answers(board, b"\n") == [">no set: line too long"]
    assert threshold(board, 0) == 30


PIECES = st.one_of(st.binary(max_size=40), st.sampled_from(
    [b"get ", b"set 0 ", b"set * ", b"keep", b"\n", b"\r", b"?", b"threshold_counts=", b"polarity=",
     b"*", b"0", b"+well", b"-*", b"script off", b"\t", b" ", b"\xff", b"\x00", b"x" * 200]))


@settings(max_examples=60, deadline=None)
@given(st.lists(st.lists(PIECES, max_size=8).map(b"".join), max_size=12))
def test_nothing_a_host_sends_raises_out_of_the_sim(chunks):
    board = SimBoard("pumphouse", seed=1, settings=bool(len(chunks) % 2))
    for chunk in chunks:
        board.write(chunk)
    board.write(b"\n")
    board.take()
    assert len(board._commands) == 0
