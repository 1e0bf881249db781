"""SimBoard end to end through protocol's own Decoder: info, pacing, seeds, faults, presses, truth."""

import numpy as np
import pytest

from devices.faults import FaultPlan
from devices.simulator import SimBoard
from protocol.decoder import Decoder
from protocol.errors import UserError
from protocol.events import Answer, BoardInfo, FrameBlock, Note


class FakeClock:
    def __init__(self) -> None:
        self.now = 100.0

    def __call__(self) -> float:
        return self.now


def decode(data: bytes):
    d = Decoder()
    events = d.feed(data, 0.0)
    frames = [e for e in events if isinstance(e, FrameBlock)]
    widest = [f.readings for f in frames if f.channels == frames[0].channels] if frames else []
    readings = np.concatenate(widest) if widest else np.zeros((0, 0), np.int64)
    return d, events, readings


def test_clean_stream_decodes_with_info_and_no_faults():
    board = SimBoard("greenhouse", seed=7)
    d, events, readings = decode(board.run_for(5.0))
    info = next(e for e in events if isinstance(e, BoardInfo))
    assert info.proto == 1 and info.board == "greenhouse" and info.channels == 9 and info.rate_hz == 60
    assert info.names[:5] == ("zone1", "zone2", "zone3", "zone4", "stop") and info.polarity == (1,)
    assert info.method == "charge_time" and info.fw
    assert isinstance(events[0], Note)
    s = d.stats
    assert s.frames == 301 == board.injected.frames_sent  # frames at t = 0, 1/60, ..., 5.0
    assert s.garbled == s.bad_checksum == s.lost == s.resets == s.width_mismatch == 0
    assert readings.shape == (301, 9)


def test_seed_repeats_exactly_and_differs_between_seeds():
    a = SimBoard("pumphouse", seed=11).run_for(8.0)
    b = SimBoard("pumphouse", seed=11)
    chunks = b.run_for(0.5) + b.run_for(3.3) + b.run_for(4.2)
    assert a == chunks
    assert a != SimBoard("pumphouse", seed=12).run_for(8.0)


def test_clock_paces_frames_and_speed_scales_time():
    clock = FakeClock()
    board = SimBoard("greenhouse", seed=1, speed=4.0, clock=clock)
    _, _, first = decode(board.read_due())
    assert len(first) == 1  # only the frame at t = 0 is due
    clock.now += 0.5  # half a second of clock = 2 s of board time at speed 4 -> 120 more frames
    d = Decoder()
    d.feed(board.read_due(), 0.0)
    assert d.stats.frames == 120
    assert board.seconds_to_next_frame() == pytest.approx((121 / 60 - 2.0) / 4)
    assert board.read_due() == b""


def test_question_mark_answers_with_the_info_line():
    board = SimBoard("grid64", seed=0)
    board.run_for(0.01)
    board.write(b"?")
    assert board.take() == b""  # not a full line yet
    board.write(b"\n")
    answer = board.take()
    assert answer == board.info_line(announce=False)
    assert b"channels=64" in answer and b"polarity=-" in answer
    # The answer carries no proto: asking must not start a new session (PROTOCOL.md, host to board).
    assert b"proto=" not in answer and b"proto=1" in board.info_line()


def test_asking_for_the_info_keeps_a_held_key_touched():
    from processing.detections import KeyState, Rebaselined, Release
    from processing.session import Session
    from processing.settings import ChannelSettings
    from protocol.decoder import Decoder

    board = SimBoard("greenhouse", seed=2, script=False)
    decoder, session = Decoder(), Session()
    session.handle(decoder.feed(board.run_for(3.0), 0.0))
    session.set_channel_settings(0, ChannelSettings(threshold_counts=30, hysteresis_counts=8))
    board.press("zone1", True)
    session.handle(decoder.feed(board.run_for(1.0), 0.0))
    assert session.rows()[0].state == KeyState.TOUCHED
    board.write(b"?\n")
    after = session.handle(decoder.feed(board.run_for(0.5), 0.0))
    assert not [e for e in after if isinstance(e, Release | Rebaselined)]
    assert session.rows()[0].state == KeyState.TOUCHED


def test_press_and_release_by_command_and_by_call():
    board = SimBoard("greenhouse", seed=2, script=False)
    _, _, idle = decode(board.run_for(1.0))
    board.write(b"+zone3\n")
    _, _, pressed = decode(board.run_for(1.0))
    board.write(b"-zone3\n")
    _, _, released = decode(board.run_for(1.0))
    ch = board.channel("zone3")
    assert pressed[10:, ch].mean() - idle[:, ch].mean() > 40  # charge time: a touch raises counts
    assert abs(released[10:, ch].mean() - idle[:, ch].mean()) < 5
    board.press(1, True, 0.5)
    assert board.held() == ["zone2"]
    board.write(b"-*\n")
    assert board.held() == []
    truth = board.scripted_touches()
    assert [(c.names, c.source) for c in truth] == [(("zone3",), "press"), (("zone2",), "press")]
    assert truth[0].hold_s == pytest.approx(1.0, abs=0.02)


def test_bad_commands_become_board_notes_not_crashes():
    board = SimBoard("greenhouse", seed=2)
    board.take()
    board.write(b"+nosuchpad\nhello\n+zone1=9\n")
    events = decode(board.take())[1]
    notes = [e.text for e in events if isinstance(e, Note)]
    assert len(notes) == 2 and all(n.startswith("error:") for n in notes)
    assert "no pad 'nosuchpad'" in notes[0]
    # A board that takes section 7's commands answers an unknown word with a refusal, not a note.
    assert [(e.kind, e.text) for e in events if isinstance(e, Answer)] == [("no", "hello: unknown command")]
    old = SimBoard("greenhouse", seed=2, settings=False)
    old.take()
    old.write(b"hello\n")
    note = next(e.text for e in decode(old.take())[1] if isinstance(e, Note))
    assert note.startswith("error: unknown command")
    with pytest.raises(UserError):
        board.press("zone9")


def test_script_ground_truth_matches_what_the_readings_show():
    board = SimBoard("greenhouse", seed=5)
    _, _, r = decode(board.run_for(30.0))
    t = np.arange(len(r)) / 60.0
    fingers = [c for c in board.scripted_touches() if c.kind == "finger"]
    assert len(fingers) == 6 and {c.source for c in fingers} == {"script"}
    idle = np.median(r[t < 1.5], axis=0)
    for c in fingers:
        ch = c.channels[0]
        inside = (t > c.start_s + 0.1) & (t < c.end_s - 0.1)
        assert r[inside, ch].mean() - idle[ch] > 20 * c.strength, c
    swipe = next(c for c in board.scripted_touches() if c.kind == "swipe")
    inside = (t > swipe.start_s) & (t < swipe.end_s)
    slider = r[inside][:, list(swipe.channels)] - idle[list(swipe.channels)]
    assert np.argmax(slider[:10].mean(0)) == 0 and np.argmax(slider[-10:].mean(0)) == 3  # dur0 -> dur3


def test_random_touches_are_seeded_and_reported():
    a = SimBoard("grid64", seed=9)
    a.run_for(30.0)
    truth = a.scripted_touches()
    assert 8 <= len(truth) <= 40 and {c.source for c in truth} == {"random"}
    b = SimBoard("grid64", seed=9)
    assert [(c.channels, c.start_s) for c in b.scripted_touches(30.0)] == [(c.channels, c.start_s)
                                                                            for c in truth]


@pytest.mark.parametrize("fault, check", [
    ("drop:0.05", lambda s, inj: s.lost == inj.dropped > 0),
    ("garble:0.05", lambda s, inj: s.bad_checksum == inj.garbled > 0 and s.lost == inj.garbled),
    ("junk:0.05", lambda s, inj: s.garbled == inj.junk > 0 and s.lost == 0),
    ("reset@4", lambda s, inj: s.resets == inj.resets == 1 and s.lost == 0),
    ("width:7@4", lambda s, inj: s.width_mismatch == 2 and s.board_changes == inj.width_changes == 1),
])
def test_each_link_fault_shows_in_the_link_statistics_as_injected(fault, check):
    board = SimBoard("greenhouse", seed=3, faults=FaultPlan.parse([fault]))
    d, _, _ = decode(board.run_for(10.0))
    assert check(d.stats, board.injected), (d.stats, board.injected)
    assert d.stats.frames == board.injected.frames_sent - board.injected.garbled - d.stats.width_mismatch


def test_stall_pauses_the_stream_without_losing_sequence():
    board = SimBoard("greenhouse", seed=3, faults=FaultPlan.parse(["stall:2@3"]))
    d, events, _ = decode(board.run_for(6.0))
    assert board.injected.stalls == 1 and board.injected.stalled_s == pytest.approx(2.0)
    assert d.stats.lost == 0 and d.stats.frames == 6 * 60 + 1 - 120
    seqs = np.concatenate([e.seq for e in events if isinstance(e, FrameBlock)])
    assert np.all(np.diff(seqs) == 1)  # the board paused; it did not skip


def test_stall_seen_by_the_clock():
    clock = FakeClock()
    board = SimBoard("greenhouse", seed=3, faults=FaultPlan.parse(["stall:1@1"]), clock=clock)
    board.read_due()
    clock.now += 1.5
    board.read_due()
    assert board.injected.frames_sent == 60  # frames before 1 s, then silence
    clock.now += 1.0
    board.read_due()
    assert board.injected.frames_sent == 60 + 31  # from 2.0 s to 2.5 s


def test_unit_faults_stuck_and_open_by_name():
    board = SimBoard("greenhouse", seed=4, script=False,
                     faults=FaultPlan.parse(["stuck:zone4@1", "open:zone1", "short:stop", "noisy:dur2:30"]))
    _, _, r = decode(board.run_for(3.0))
    z4 = board.channel("zone4")
    assert r[90:, z4].mean() - r[:50, z4].mean() > 25  # zone4 is the small key: about 37 counts
    assert any(c.source == "stuck" for c in board.scripted_touches())
    assert r[:, board.channel("zone1")].mean() < 0.3 * r[:, board.channel("zone2")].mean()
    assert (r[:, board.channel("stop")] == 65535).all()
    assert r[:, board.channel("dur2")].std() > 10 * r[:, board.channel("dur1")].std()
    with pytest.raises(UserError, match="no pad 'zone7'"):
        SimBoard("greenhouse", faults=FaultPlan.parse(["open:zone7"]))


def test_skipped_frames_are_lost_on_the_host_side():
    board = SimBoard("greenhouse", seed=1)
    d = Decoder()
    d.feed(board.run_for(1.0), 0.0)
    assert board.skip_until(3.0) == 120
    d.feed(board.run_for(1.0), 0.0)
    assert d.stats.lost == 120 == board.injected.extra["overrun"]


def test_no_checksum_mode_and_speed_validation():
    data = SimBoard("greenhouse", checksum=False).run_for(0.5)
    assert b"*" not in data.split(b"\n")[2]
    assert decode(data)[0].stats.frames == 31
    with pytest.raises(UserError, match="speed"):
        SimBoard("greenhouse", speed=0)


@pytest.mark.parametrize("args, words", [
    (["--seed", "-1"], "seed -1 is out of range"),
    (["--speed", "nan"], "speed nan is out of range"),
    (["--random", "-2"], "random touches -2 per minute"),
    (["--duration", "nan"], "--duration must be a number of seconds above zero"),
    (["--duration", "0"], "--duration must be a number of seconds above zero"),
    (["--fault", "drop:2"], "the rate must be a number from 0 to 1"),
])
def test_padtune_sim_option_mistakes_are_one_line(capsys, args, words):
    from tui.cli import main

    code = main(["sim", "greenhouse", *args])
    err = capsys.readouterr().err
    assert code == 2 and words in err and len(err.strip().splitlines()) == 1, err


def test_padtune_sim_broken_board_file_is_one_line(capsys, tmp_path):
    from devices.boards import BOARDS_DIR
    from tui.cli import main

    bad = tmp_path / "panel.toml"
    good = (BOARDS_DIR / "greenhouse.toml").read_text()
    bad.write_text(good.replace('material = "polycarbonate"', 'material = "polycarbonat"'))
    assert main(["sim", str(bad)]) == 2
    err = capsys.readouterr().err
    assert err.startswith("padtune: panel.toml: overlay.material:") and "did you mean polycarbonate" in err
    assert len(err.strip().splitlines()) == 1


def test_long_host_lines_are_answered_in_one_protocol_line():
    # protocol v1 lines are at most 1024 bytes (protocol/PROTOCOL.md): a host that sends a very long
    # line gets one short refusal back, as the C board's parser gives (pt_cmd.c: its first word, at
    # most 16 characters), and the board goes on.
    board = SimBoard("greenhouse", seed=2)
    board.take()
    board.write(b"+" + b"x" * 3000 + b"\n" + b"hello" * 600 + b"\n")
    d, events, _ = decode(board.take() + board.run_for(0.5))
    assert [(e.kind, e.text) for e in events if isinstance(e, Answer)] == [
        ("no", "+xxxxxxxxxxxxxxx: line too long"),
        ("no", "hellohellohelloh: line too long")]
    assert d.stats.overlong == d.stats.garbled == 0 and d.stats.frames > 20
    # A board without section 7's commands says it in one short comment instead.
    board = SimBoard("greenhouse", seed=2, settings=False)
    board.take()
    board.write(b"+" + b"x" * 3000 + b"\n")
    notes = [e.text for e in decode(board.take())[1] if isinstance(e, Note)]
    assert len(notes) == 1 and notes[0].startswith("error:") and "line too long" in notes[0]


def test_padtune_sim_link_in_a_missing_folder_is_one_line(capsys, tmp_path):
    from tui.cli import main

    link = tmp_path / "no" / "such" / "tty"
    assert main(["sim", "greenhouse", "--link", str(link), "--duration", "0.1"]) == 2
    err = capsys.readouterr().err
    assert "cannot make the link" in err and len(err.strip().splitlines()) == 1, err


@pytest.mark.parametrize("item, words", [
    ("width:7.5@3", "whole number of channels"),
    ("width:7", "write width:N@SECONDS"),
    ("reset", "write reset@SECONDS"),
    ("drop:0.1@2", "takes a rate, not a time"),
    ("open:zone1@3", "takes no @time"),
    ("short:stop:2", "takes only a pad name"),
    ("noisy:dur1:0.5", "noise factor must be a number from 1 to 1000"),
    ("melt:zone1", "unknown fault 'melt'"),
])
def test_fault_items_say_what_is_wrong(item, words):
    with pytest.raises(UserError) as err:
        FaultPlan.parse([item])
    assert words in str(err.value) and "\n" not in str(err.value), str(err.value)


def test_script_off_keeps_the_panel_still_until_script_on():
    from protocol.decoder import Decoder

    def zone_spread(board: SimBoard, seconds: float) -> int:
        decoder = Decoder()
        blocks = [e for e in decoder.feed(board.run_for(seconds), 0.0) if isinstance(e, FrameBlock)]
        readings = np.concatenate([b.readings for b in blocks])
        return int(np.ptp(readings[:, :4], axis=0).max())

    board = SimBoard("greenhouse", seed=4)  # its script touches a zone key every couple of seconds
    moving = zone_spread(board, 8.0)
    board.write(b"script off\n")
    board.run_for(2.0)  # a touch already under way ends as it would (the finger lifts in its own time)
    still = zone_spread(board, 8.0)
    assert still * 3 < moving  # only noise is left
    paused_at = board.generated_s - 10.0
    truth = board.scripted_touches()
    assert [c for c in truth if c.start_s < paused_at]  # what did happen before the pause stays true
    assert not [c for c in truth if c.start_s >= paused_at and c.source != "press"]
    board.write(b"+zone1\n")  # presses still work while the script is paused
    assert zone_spread(board, 1.0) > still * 3
    board.write(b"-zone1\nscript on\n")
    assert zone_spread(board, 8.0) > still * 3
