"""The plain forms of PROTOCOL.md ("Plain forms"): one test (or a few) per form and rule, on the plain
decoder and on each way of the fast one. The streams are what quick sketches print (issue 9)."""

from unittest import mock

import numpy as np
import pytest

import protocol.decoder as fast_module
from protocol.decoder import Decoder
from protocol.decoder_plain import PlainDecoder
from protocol.events import BoardChanged, BoardInfo, FaultKind, FrameBlock, LinkFault, Note, StreamForm
from protocol.info import name_problem
from protocol.plainforms import decide_form, parse_plain

from .helpers import ck, flat, frames, kinds, stream


@pytest.fixture(params=["fast", "scan", "small", "plain"])
def dec(request):
    if request.param == "plain":
        yield PlainDecoder()
        return
    limit = {"fast": fast_module.SCAN_MIN_BYTES, "scan": 0, "small": 10**9}[request.param]
    with mock.patch.object(fast_module, "SCAN_MIN_BYTES", limit):
        yield Decoder()


def feed(dec, lines, t_s=1.0, end=b"\n"):
    return dec.feed(b"".join(line + end for line in lines), t_s)


def forms(events):
    return [e for e in events if isinstance(e, StreamForm)]


def readings(events):
    return [f[1] for f in frames(events)]


def board_times(events):
    out = []
    for e in events:
        if isinstance(e, FrameBlock):
            out += [None] * len(e) if e.board_time is None else e.board_time.tolist()
    return out


# Readings as a touch board prints them: a baseline near 1234 with a little noise (never rising 7 times
# in a row, so never taken for a time column).
NOISE = [0, 3, -2, 1, 4, -1, 2, -3, 0, 1, -2, 3]


def counts(k, base=1234):
    return base + NOISE[k % len(NOISE)]


# -- the forms ---------------------------------------------------------------------------------------
@pytest.mark.parametrize("template, form, names", [
    ("zone1:{a}, zone2:{b}", "pairs", ("zone1", "zone2")),
    ("zone1:{a},zone2:{b},", "pairs", ("zone1", "zone2")),
    ("a:{a} b:{b}", "pairs", ("a", "b")),
    ("x={a},y={b}", "pairs", ("x", "y")),
    ("T0: {a}  T1: {b}", "pairs", ("T0", "T1")),
    ("T0:[ {a}] T1:[ {b}] ", "brackets", ("T0", "T1")),
    ("T0:[{a}]T1:[{b}]", "brackets", ("T0", "T1")),
    ("{a:6d}{b:6d}", "columns", ()),
    ("  {a}\t{b}", "columns", ()),
    ("{a}, {b},", "columns", ()),
])
def test_each_form_is_read_with_its_names(dec, template, form, names):
    lines = [template.format(a=counts(k), b=counts(k, 1250)).encode() for k in range(10)]
    ev = feed(dec, lines)
    (sf,) = forms(ev)
    assert (sf.form, sf.names, sf.scale, sf.time_column) == (form, names, 1, False)
    assert readings(ev) == [(counts(k), counts(k, 1250)) for k in range(10)]
    assert dec.stats.garbled == dec.stats.width_mismatch == 0 and dec.channels == 2
    assert isinstance(ev[0], StreamForm)  # before the frames read in it


def test_the_first_eight_data_lines_are_held_then_flushed_in_stream_order(dec):
    """Nothing comes out until the form is decided; then the form, and every held line's events in
    the order they arrived, each frame with the host time of the chunk that completed its line."""
    ev = []
    for k in range(7):
        ev += dec.feed(b"a:%d b:%d\n" % (counts(k), counts(k + 1)), float(k))
        if k == 2:
            ev += dec.feed(b"calibrating\n# comment\n@@\n", 2.5)
    assert ev == [] and dec.holding == 7
    ev = dec.feed(b"a:1 b:2\na:3 b:4\n", 9.0)
    order = [f[0] if f[0] != "frame" else f"frame at {f[1]}" for f in flat(ev)]
    assert order == ["StreamForm", "frame at 0.0", "frame at 1.0", "frame at 2.0", "Note", "Note",
                     "LinkFault", "frame at 3.0", "frame at 4.0", "frame at 5.0", "frame at 6.0",
                     "frame at 9.0", "frame at 9.0"]
    assert [f[4] for f in flat(ev) if f[0] == "frame"] == list(range(9))  # frame indices in order
    assert ev[0].t_s == 0.0 and dec.holding == 0


def test_the_hold_is_bounded(dec):
    """One data line among pages of text: decided at 64 lines in all, so memory stays bounded."""
    ev = feed(dec, [b"512 498"] + [b"Status report line"] * 62)
    assert ev == [] and dec.holding == 1
    ev = feed(dec, [b"More text"])
    assert frames(ev) == [(-1, (512, 498))] and dec.stats.notes == 63 and dec.holding == 0


def test_flush_hold_decides_on_fewer_lines(dec):
    ev = feed(dec, [b"a:1 b:2", b"a:3 b:4"]) + dec.flush_hold(3.0)
    assert forms(ev)[0].names == ("a", "b") and readings(ev) == [(1, 2), (3, 4)]
    assert dec.flush_hold(4.0) == []


# -- the time column ---------------------------------------------------------------------------------
def test_a_leading_millis_column_is_the_boards_time_not_a_key(dec):
    lines = [b"%d %d %d" % (1000 + 10 * k + (k % 2), counts(k), counts(k, 1250)) for k in range(12)]
    ev = feed(dec, lines)
    (sf,) = forms(ev)
    assert sf.time_column and sf.form == "columns" and dec.channels == 2
    assert readings(ev) == [(counts(k), counts(k, 1250)) for k in range(12)]  # keys keep their places
    assert board_times(ev) == [1000 + 10 * k + (k % 2) for k in range(12)]


def test_a_time_pair_is_the_boards_time_and_its_name_is_not_a_key(dec):
    ev = feed(dec, [b"t:%d a:%d b:%d" % (500 * k, counts(k), counts(k, 99)) for k in range(9)])
    (sf,) = forms(ev)
    assert sf.time_column and sf.names == ("a", "b") and sf.form == "pairs"
    assert board_times(ev) == [500 * k for k in range(9)]


def test_time_in_seconds_with_decimals_has_its_own_scale(dec):
    ev = feed(dec, [b"%.3f %d" % (12.5 + 0.01 * k, counts(k)) for k in range(8)])
    (sf,) = forms(ev)
    assert sf.time_column and sf.scale == 1 and "x1000" in sf.detail
    assert board_times(ev) == [12500 + 10 * k for k in range(8)]


@pytest.mark.parametrize("steps, timed", [
    ([10] * 7, True),
    ([1, 1, 2, 1, 1, 2, 1], True),  # millis() at about 1 kHz
    ([10, 40, 10, 10, 10, 10, 10], True),  # largest step 4 x the smallest: still steady
    ([10, 41, 10, 10, 10, 10, 10], False),  # more than 4 x: a reading, not a clock
    ([5, 4, 3, 2, 1, 1, 1], False),  # a settling reading: 5 x
    ([10, 10, 0, 10, 10, 10, 10], False),  # not strictly rising
    ([10, 10, 10, -10, 10, 10, 10], False),
])
def test_the_time_column_rule(steps, timed):
    first = np.cumsum([100, *steps])
    lines = [parse_plain(b"%d %d" % (t, counts(k))) for k, t in enumerate(first)]
    assert decide_form(lines, None).time_column is timed


def test_fewer_than_four_lines_never_make_a_time_column():
    lines = [parse_plain(b"%d 7" % t) for t in (10, 20, 30)]
    assert not decide_form(lines, None).time_column
    assert decide_form([*lines, parse_plain(b"40 7")], None).time_column


def test_an_info_lines_channel_count_settles_the_time_column(dec):
    rising = [b"%d %d" % (100 + k, counts(k)) for k in range(8)]
    ev = feed(dec, [b"! channels=2", *rising])  # width = channels: v1 frames, both columns are keys
    assert forms(ev) == [] and readings(ev)[0] == (100, counts(0)) and dec.channels == 2
    other = PlainDecoder()
    ev = feed(other, [b"! channels=1", *rising])  # width = channels + 1: the rising column is time
    assert forms(ev)[0].time_column and other.channels == 1 and board_times(ev)[0] == 100


def test_a_time_column_going_back_is_a_board_reset(dec):
    times = [1000 + 10 * k for k in range(9)] + [5, 15]
    ev = feed(dec, [b"%d %d" % (t, counts(k)) for k, t in enumerate(times)])
    assert dec.stats.resets == 1 and dec.stats.frames == 11
    (reset,) = [e for e in ev if isinstance(e, LinkFault)]
    assert reset.kind is FaultKind.RESET and "1080 -> 5" in reset.detail
    assert board_times(ev)[-2:] == [5, 15]


# -- decimals ----------------------------------------------------------------------------------------
def test_decimals_are_read_at_a_fixed_scale_never_rounded(dec):
    lines = [b"%d.%d0 %d.25" % (counts(k), k, counts(k, 12)) for k in range(8)]
    lines += [b"1234.5 12", b"1234.567 12.25", b"-0.5 0.01", b"21474836.47 0", b"21474836.48 0"]
    ev = feed(dec, lines)
    (sf,) = forms(ev)
    assert sf.scale == 100
    got = readings(ev)
    assert got[:8] == [(counts(k) * 100 + 10 * k, counts(k, 12) * 100 + 25) for k in range(8)]
    assert got[8:] == [(123450, 1200), (-50, 1), (2147483647, 0)]  # fewer decimals padded exactly
    garbled = [e.detail for e in ev if isinstance(e, LinkFault)]
    assert len(garbled) == 2 and dec.stats.garbled == 2
    assert "1234.567 has 3 decimals, more than the 2" in garbled[0] and "never rounded" in garbled[0]
    assert "21474836.48 is outside the 32-bit range at x100" in garbled[1]


def test_a_scale_that_would_overflow_32_bits_garbles_the_line_not_the_stream(dec):
    ev = feed(dec, [b"%d 0.000001" % counts(k, 9000) for k in range(8)])
    assert forms(ev)[0].scale == 10**6 and dec.stats.garbled == 8  # 9000 x 10^6 is over 2^31
    assert "outside the 32-bit range" in ev[1].detail


# -- line ends, text lines ----------------------------------------------------------------------------
@pytest.mark.parametrize("end", [b"\r", b"\r\n", b"\n"])
def test_cr_crlf_and_lf_line_ends(dec, end):
    ev = feed(dec, [b"T0:[ %d] T1:[ %d] " % (counts(k), counts(k, 1250)) for k in range(9)], end=end)
    assert len(readings(ev)) == 9 and dec.stats.garbled == 0


def test_text_lines_are_notes_and_the_first_is_kept_for_the_diagnosis(dec):
    lines = [b"# a comment first", b"Touch demo v2", b"zone1:1234 zone2:1250", b"  Calibrating, wait...",
             b"Status: 5 errors", b"a:1 b:[2]"]
    ev = feed(dec, lines) + dec.flush_hold(1.0)
    notes = [e.text for e in ev if isinstance(e, Note)]
    assert notes == ["a comment first", "Touch demo v2", "Calibrating, wait...", "Status: 5 errors",
                     "a:1 b:[2]"]
    assert dec.stats.notes == 5 and dec.stats.garbled == 0 and dec.stats.frames == 1
    assert dec.first_unreadable == b"Touch demo v2"  # a # comment is never "unreadable"
    dec.clear_unreadable()
    feed(dec, [b"# only a comment"])
    assert dec.first_unreadable is None


@pytest.mark.parametrize("line", [b"---- boot ----", b"*** reset ***", b"[12] ok", b"Temp: 25\xb0C",
                                  b"1:2:3"])
def test_punctuation_binary_and_malformed_data_stay_garbled(dec, line):
    ev = feed(dec, [line])
    assert kinds(ev) == [FaultKind.GARBLED] and dec.first_unreadable == line


# -- changes of form ---------------------------------------------------------------------------------
def test_a_pairs_line_with_other_names_is_dropped_three_in_a_row_start_a_new_form(dec):
    first = [b"a:%d b:%d" % (counts(k), counts(k, 9)) for k in range(8)]
    other = [b"a:%d c:%d d:5" % (counts(k), counts(k, 9)) for k in range(10)]
    ev = feed(dec, [*first, b"a:1 x:2", other[0], b"# between", other[1], *other[2:]])
    mismatches = [e for e in ev if isinstance(e, LinkFault)]
    assert [m.kind for m in mismatches] == [FaultKind.WIDTH_MISMATCH] * 3
    assert "pairs a,x, pairs a,b expected" in mismatches[0].detail
    assert [f.names for f in forms(ev)] == [("a", "b"), ("a", "c", "d")]
    change = next(e for e in ev if isinstance(e, BoardChanged))
    assert (change.old_channels, change.channels) == (2, 3)
    assert readings(ev)[8:] == [(counts(k), counts(k, 9), 5) for k in range(2, 10)]  # third line on


def test_a_new_hold_that_finds_the_same_form_announces_nothing(dec):
    """Three stray lines of another shape start a new hold; the board's form wins it again."""
    lines = [b"a:%d b:%d" % (counts(k), counts(k, 9)) for k in range(8)]
    ev = feed(dec, [*lines, b"1 2", b"1 2", b"1 2", *lines])
    assert len(forms(ev)) == 1 and dec.stats.frames == 16 and dec.stats.width_mismatch == 3
    assert not any(isinstance(e, BoardChanged) for e in ev)


def test_an_info_line_without_proto_keeps_the_form(dec):
    lines = [b"a:%d b:%d" % (counts(k), counts(k, 9)) for k in range(8)]
    ev = feed(dec, [*lines, b"! names=left,right polarity=-", *lines])
    assert len(forms(ev)) == 1 and dec.stats.frames == 16 and dec.info.names == ("left", "right")


def test_an_info_line_that_starts_a_session_forgets_the_form(dec):
    lines = [b"a:%d b:%d" % (counts(k), counts(k, 9)) for k in range(8)]
    ev = feed(dec, [*lines, b"! proto=1 board=x", *lines])
    assert len(forms(ev)) == 2 and dec.stats.frames == 16


def test_an_info_line_ends_a_hold_when_it_starts_a_session(dec):
    ev = feed(dec, [b"a:1 b:2", b"a:3 b:4", b"! proto=1 channels=3", b"1 2 3"])
    assert [type(e).__name__ for e in ev] == ["StreamForm", "FrameBlock", "BoardInfo", "BoardChanged",
                                              "FrameBlock"]
    assert readings(ev) == [(1, 2), (3, 4), (1, 2, 3)]  # after the info line: v1 frames of its width


def test_v1_integer_columns_of_the_info_lines_width_are_read_at_once(dec):
    ev = feed(dec, [b"! proto=1 channels=3", b"512 498 1020", b"513 497 1021"])
    assert readings(ev) == [(512, 498, 1020), (513, 497, 1021)] and forms(ev) == []


def test_stray_lines_before_sequenced_frames_are_read_as_v1_without_delay(dec):
    """Opening a port mid-line leaves a tail ("3 498 1020" of "@1 513 498 1020"): sequenced frames
    after it end the hold at once and the stray is read by the v1 rules."""
    ev = feed(dec, [b"498 1020", b"@2 514 499 1021", b"@3 515 500 1022", b"zone:5", b"zone:5"])
    assert frames(ev) == [(2, (514, 499, 1021)), (3, (515, 500, 1022))]  # judged by the frames' width
    assert dec.stats.width_mismatch == 1 and forms(ev) == [] and dec.stats.garbled == 2


def test_a_plain_form_is_not_taken_in_bulk(dec):
    """Lines the bulk ways would take as v1 frames are still checked against the form."""
    lines = [b"a:%d b:%d" % (counts(k), counts(k, 9)) for k in range(8)]
    ev = feed(dec, [*lines, *[b"%d %d" % (counts(k), counts(k, 9)) for k in range(2)], *lines])
    assert dec.stats.width_mismatch == 2 and dec.stats.frames == 16 and len(forms(ev)) == 1


def test_checksummed_plain_lines(dec):
    ev = feed(dec, [ck(b"a:%d b:%d" % (counts(k), counts(k, 9))) for k in range(8)] + [b"a:1 b:2"])
    assert dec.stats.frames == 8 and dec.stats.bad_checksum == 1 and forms(ev)[0].names == ("a", "b")


# -- repeated sequence numbers -----------------------------------------------------------------------
def test_repeated_sequence_numbers_are_delivered_counted_and_reported_at_powers_of_two(dec):
    ev = feed(dec, [b"@5 1 2"] + [b"@5 1 2"] * 10 + [b"@6 1 2"] + [b"@6 1 2"] * 6)
    reps = [e for e in ev if isinstance(e, LinkFault)]
    assert [e.kind for e in reps] == [FaultKind.REPEATED] * 5
    assert [e.count for e in reps] == [1, 1, 2, 4, 8]  # at repeats 1, 2, 4, 8 and 16
    assert dec.stats.extra["repeated"] == 16 and dec.stats.resets == 0 and dec.stats.frames == 18


def test_a_flood_of_one_repeated_frame_gives_a_handful_of_events():
    dec = Decoder()
    ev = dec.feed(stream([b"@7 1 2 3"] * 40_000), 0.0)
    assert dec.stats.frames == 40_000 and dec.stats.extra["repeated"] == 39_999
    assert len([e for e in ev if isinstance(e, LinkFault)]) == 16  # 1, 2, 4 ... 32768


# -- names -------------------------------------------------------------------------------------------
@pytest.mark.parametrize("name, problem", [
    ("zone1", None), ("a.b-c_D9", None), ("x" * 32, None),
    ("", "empty"), ("x" * 33, "33 characters"), ("zone 2", "' ' is not allowed"), ("zone#3", "'#'"),
    ("é", "'é'"), ("a,b", "','"),
])
def test_name_problem(name, problem):
    found = name_problem(name)
    assert (found is None) if problem is None else (problem in found)


def test_odd_names_in_pairs_are_passed_up_for_the_session_to_judge(dec):
    ev = feed(dec, [b"zone#1:%d Zone.2:%d" % (counts(k), counts(k, 9)) for k in range(8)])
    assert forms(ev)[0].names == ("zone#1", "Zone.2")
    assert [name_problem(n) is None for n in forms(ev)[0].names] == [False, True]


def test_info_names_are_kept_with_a_bad_one_among_them():
    (info,) = Decoder().feed(b"! proto=1 channels=3 names=zone1,,zone%3\n", 0.0)
    assert isinstance(info, BoardInfo)
    assert info.names == ("zone1", "", "zone%3") and info.channels == 3
    # Only a wrong count makes the names unusable (the line is then garbled, as before).
    (fault,) = Decoder().feed(b"! proto=1 channels=3 names=zone1,zone2\n", 0.0)
    assert fault.kind is FaultKind.GARBLED and "2 names for channels=3" in fault.detail
