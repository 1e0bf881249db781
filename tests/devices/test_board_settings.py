"""The simulated boards' side of PROTOCOL.md section 7: get, set, keep, and what survives a restart."""

from __future__ import annotations

import os
from pathlib import Path

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
