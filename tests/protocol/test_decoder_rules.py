"""One test (or a few) for every rule of PROTOCOL.md, on the plain decoder and each fast way."""

from unittest import mock

import numpy as np
import pytest

import protocol.decoder as fast_module
from protocol.decoder import Decoder
from protocol.decoder_plain import PlainDecoder
from protocol.events import BoardChanged, BoardInfo, FaultKind, FrameBlock, LinkFault, Note

from .helpers import ck, flat, frames, kinds, stream


@pytest.fixture(params=["fast", "scan", "small", "plain"])
def dec(request):
    """Every rule test runs on the plain decoder and on each way of the fast one."""
    if request.param == "plain":
        yield PlainDecoder()
        return
    limit = {"fast": fast_module.SCAN_MIN_BYTES, "scan": 0, "small": 10**9}[request.param]
    with mock.patch.object(fast_module, "SCAN_MIN_BYTES", limit):
        yield Decoder()


def feed_lines(dec, lines, t_s=1.0):
    """The lines as one stream, then the end of it: lines held for a plain form are let go."""
    return dec.feed(stream(lines), t_s) + dec.flush_hold(t_s)


def test_plain_frames_with_every_separator(dec):
    ev = feed_lines(dec, [b"1 2 3", b"4,5,6", b"7\t8\t9", b"10, 11 ,12", b"-1 -2 -3"])
    assert frames(ev) == [(-1, (1, 2, 3)), (-1, (4, 5, 6)), (-1, (7, 8, 9)), (-1, (10, 11, 12)),
                          (-1, (-1, -2, -3))]
    assert dec.stats.frames == 5 and dec.channels == 3


def test_trailing_separator_is_allowed_but_empty_values_are_not(dec):
    ev = feed_lines(dec, [b"1,2,3,", b"1 2 3 ", b"1,,2,3", b"1, ,2,3", b"1,2,3,,"])
    assert frames(ev) == [(-1, (1, 2, 3)), (-1, (1, 2, 3))]
    assert dec.stats.garbled == 3


def test_crlf_and_blank_lines(dec):
    ev = dec.feed(b"1 2\r\n\r\n\n   \n\t\n3 4\r\n", 0.0) + dec.flush_hold(0.0)
    assert frames(ev) == [(-1, (1, 2)), (-1, (3, 4))]
    assert dec.stats.garbled == 0


def test_lf_crlf_and_a_lone_cr_all_end_a_line(dec):
    """Before issue 9 a CR only counted just before an LF, so a CR-only board was one endless line."""
    ev = dec.feed(b"@0 1 2\r@1 3 4\r\n@2 5 6\n@3 7 8\r\r\n\r", 0.0)
    assert frames(ev) == [(0, (1, 2)), (1, (3, 4)), (2, (5, 6)), (3, (7, 8))]
    assert dec.stats.garbled == 0 and dec.stats.lost == 0


def test_only_spaces_tabs_and_commas_separate(dec):
    feed_lines(dec, [b"1 2\x0b3", b"1\x0c2"])
    assert dec.stats.garbled == 2 and dec.stats.frames == 0


def test_32_bit_range(dec):
    ev = feed_lines(dec, [b"2147483647 -2147483648", b"2147483648 0", b"0 -2147483649"])
    assert frames(ev) == [(-1, (2147483647, -2147483648))]
    assert dec.stats.garbled == 2


def test_leading_zeros_and_minus_zero_are_decimal_integers(dec):
    ev = feed_lines(dec, [b"007 -0", b"0000000000000000000000012 3"])
    assert frames(ev) == [(-1, (7, 0)), (-1, (12, 3))]


@pytest.mark.parametrize(
    "line", [b"1 2 x", b"1 +2", b"1-2 3", b"- 1 2", b"1 2-", b"1. 2", b".5 2", b"1 2 @3", b"1 2*12",
             b"  1 2 x", b"1,,2"]
)
def test_malformed_frames_are_garbled(dec, line):
    feed_lines(dec, [line])
    assert dec.stats.garbled == 1 and dec.stats.frames == 0


@pytest.mark.parametrize("line", [b"?", b"*", b"\x00\xff", b"$GPGGA,1", b"---- boot ----", b"[INFO] up",
                                  b"hello \xe9", b" @1 2 3"])
def test_anything_else_is_garbled(dec, line):
    ev = feed_lines(dec, [line])
    assert kinds(ev) == [FaultKind.GARBLED]


def test_overlong_line_is_dropped_whole_and_resynchronised(dec):
    long_line = b"1 " * 4200  # 8400 bytes
    ev = dec.feed(stream([b"@0 1 2", long_line, b"@1 3 4"]), 0.0)
    assert frames(ev) == [(0, (1, 2)), (1, (3, 4))]
    assert dec.stats.overlong == 1 and kinds(ev) == [FaultKind.OVERLONG]


def test_limit_is_8192_bytes_before_the_line_end(dec):
    """8192 since issue 9 (it was 1024, which 512 channels could never fit); the line end is not counted."""
    head = b"@0 " + b"7 " * 511
    exact = head + b"0" * (8192 - len(head) - 1) + b"7"  # 512 values, the last padded with zeros
    assert len(exact) == 8192
    feed_lines(dec, [exact, exact.replace(b"@0", b"@1") + b"\r", exact.replace(b"@0", b"@2") + b"7"])
    assert dec.stats.frames == 2 and dec.stats.overlong == 1


def test_512_channels_of_32_bit_values_fit_one_line(dec):
    """PROTOCOL.md section 1: `@65535`, 512 values of -2147483648, a checksum and CRLF in one line."""
    line = ck(b"@65535 " + b" ".join([b"-2147483648"] * 512)) + b"\r"
    assert len(line) + 1 == 6157
    ev = dec.feed(line + b"\n", 0.0)
    assert frames(ev) == [(65535, (-(2**31),) * 512)]


def test_overlong_across_many_chunks_keeps_memory_bounded(dec):
    dec.feed(b"@0 1 2\n", 0.0)
    for _ in range(200):
        dec.feed(b"9" * 1000, 0.0)
        assert dec._framer.buffered_bytes <= 8192
    ev = dec.feed(b"99\n@1 5 6\n", 0.0)
    assert frames(ev) == [(1, (5, 6))]
    assert dec.stats.overlong == 1


def test_checksums_either_case_and_mismatch(dec):
    good = ck(b"@1 10 20")
    lower = good[:-4] + good[-4:].lower()
    bad = good[:-1] + (b"0" if good[-1:] != b"0" else b"1")
    ev = feed_lines(dec, [good, ck(b"@2 11 21")[:-4] + ck(b"@2 11 21")[-4:].lower(), bad, lower])
    assert dec.stats.bad_checksum == 1
    assert frames(ev)[:2] == [(1, (10, 20)), (2, (11, 21))]


def test_no_checksum_after_a_checksummed_line_until_the_next_info_line(dec):
    ev = feed_lines(dec, [
        b"51 2",  # fine: no checksum seen yet
        ck(b"3 4"),
        b"5 6",  # bad_checksum: checksums were seen
        b"# notes need no checksum",
        b"Text lines are notes and need none either",
        b"! board=x",  # an info line ends the strict stretch
        b"7 8",
        ck(b"! board=y"),  # a checksummed info line starts another
        b"9 10",
        b"a:1 b:2",  # a plain form's line is a data line too
    ])
    assert frames(ev) == [(-1, (51, 2)), (-1, (3, 4)), (-1, (7, 8))]
    assert dec.stats.bad_checksum == 3 and dec.stats.notes == 2


def test_a_checksummed_line_of_any_kind_makes_checksums_required(dec):
    feed_lines(dec, [ck(b"# hi"), b"1 2"])
    assert dec.stats.bad_checksum == 1


def test_sequence_lost_and_wrap(dec):
    ev = feed_lines(dec, [ck(b"@65533 1"), ck(b"@65534 1"), ck(b"@65535 1"), ck(b"@0 1"), ck(b"@1 1"),
                          ck(b"@5 1")])
    assert [f[0] for f in frames(ev)] == [65533, 65534, 65535, 0, 1, 5]
    assert dec.stats.lost == 3 and dec.stats.resets == 0
    lost = [e for e in ev if isinstance(e, LinkFault)]
    assert [(e.kind, e.count) for e in lost] == [(FaultKind.LOST, 3)]


def test_loss_across_the_wrap_is_lost_not_a_reset(dec):
    feed_lines(dec, [b"@65530 1", b"@2 1"])
    assert dec.stats.lost == 7 and dec.stats.resets == 0


def test_backward_jump_is_a_reset(dec):
    ev = feed_lines(dec, [b"@100 1", b"@101 1", b"@0 1", b"@1 1", b"@1 1"])
    # A repeated number is not a reset since issue 9 (it is counted as repeated, see test_repeated_*).
    assert dec.stats.resets == 1 and dec.stats.lost == 0
    assert kinds(ev) == [FaultKind.RESET, FaultKind.REPEATED]
    assert dec.stats.frames == 5


def test_new_session_forgets_the_sequence(dec):
    feed_lines(dec, [b"@100 1", b"! proto=1 board=b channels=1", b"@0 1"])
    assert dec.stats.resets == 0 and dec.stats.lost == 0


@pytest.mark.parametrize(
    "line", [b"@ 1 2", b"@1", b"@1 ", b"@65536 1", b"@-1 2", b"@1a 2", b"@1-2 3", b"@1,,2"]
)
def test_malformed_sequenced_frames(dec, line):
    feed_lines(dec, [line])
    assert dec.stats.garbled == 1


def test_sequenced_separators(dec):
    ev = feed_lines(dec, [b"@1,2,3", b"@2\t4 ,5", b"@00003 6 7"])
    assert frames(ev) == [(1, (2, 3)), (2, (4, 5)), (3, (6, 7))]


def test_info_line_all_v1_keys():
    dec = Decoder()
    ev = dec.feed(b"! proto=1 board=greenhouse-a channels=3 rate=250.5 names=zone1,zone2,stop method=osc"
                  b" polarity=+,-,+ fw=0.4.1 colour=green\n", 2.5)
    (info,) = ev
    assert isinstance(info, BoardInfo)
    assert info.proto == 1 and info.board == "greenhouse-a" and info.channels == 3
    assert info.rate_hz == 250.5 and info.names == ("zone1", "zone2", "stop") and info.method == "osc"
    assert info.polarity == (1, -1, 1) and info.fw == "0.4.1" and info.new_session and info.t_s == 2.5
    assert info.extra == {"colour": "green"}
    assert dec.info == info and dec.channels == 3


def test_info_single_polarity_and_merge():
    dec = Decoder()
    dec.feed(b"! proto=1 board=b channels=2 polarity=-\n! fw=2 rate=50\n", 0.0)
    assert dec.info.polarity == (-1,) and dec.info.fw == "2" and dec.info.board == "b"
    assert dec.info.rate_hz == 50.0 and dec.stats.infos == 2


@pytest.mark.parametrize("line", [
    b"! proto=x", b"! channels=0", b"! channels=2 names=a", b"! rate=-1", b"! rate=nan", b"! polarity=x",
    b"! channels=2 polarity=+,-,+", b"! board", b"! =5", b"!", b"! names=", b"! board=\xe9",
    b"! channels=3 names=a,,b,c",
])
def test_bad_info_lines_are_garbled_with_a_reason(dec, line):
    ev = feed_lines(dec, [line])
    (fault,) = ev
    assert fault.kind == FaultKind.GARBLED and "info" in fault.detail
    assert dec.info is None


def test_one_bad_name_does_not_cost_the_info_line(dec):
    """An empty or invalid name is passed up as given: the session replaces only that channel's name."""
    (info,) = feed_lines(dec, [b"! channels=3 names=a,,zone#3"])
    assert info.names == ("a", "", "zone#3") and dec.info.channels == 3


def test_info_channels_sets_width_and_announces_a_change(dec):
    ev = feed_lines(dec, [b"! proto=1 channels=2", b"@0 1 2 3", b"@1 1 2", b"! channels=3", b"@2 1 2 3"])
    assert frames(ev) == [(1, (1, 2)), (2, (1, 2, 3))]
    changes = [e for e in ev if isinstance(e, BoardChanged)]
    assert [(c.old_channels, c.channels) for c in changes] == [(2, 3)]
    assert dec.stats.width_mismatch == 1 and dec.stats.board_changes == 1


def test_comment_is_a_note_never_garbage(dec):
    ev = feed_lines(dec, [b"#  zone 3 recalibrated  ", b"#", ck(b"# with sum")])
    assert [e.text for e in ev if isinstance(e, Note)] == ["zone 3 recalibrated", "", "with sum"]
    assert dec.stats.notes == 3 and dec.stats.garbled == 0


def test_width_mismatch_and_board_change_after_three(dec):
    """The v1 width rule of sequenced frames (plain forms: test_plain_forms.py)."""
    ev = feed_lines(dec, [b"@%d %s" % (k, line) for k, line in enumerate([
        b"1 2", b"1 2 3", b"1 2", b"1 2 3", b"1 2 3", b"1 2 3 4", b"1 2 3", b"1 2 3", b"1 2 3", b"1 2 3"])])
    # 3-wide frames: 1 (streak broken by a 2-wide frame), then 2, 3 -> the third makes the change
    assert dec.stats.width_mismatch == 6  # streaks of 3-wide: 1 | 1, 2 | (4-wide) | 1, 2, then the change
    assert dec.stats.frames == 4
    assert dec.stats.board_changes == 1 and dec.channels == 3
    change = next(e for e in ev if isinstance(e, BoardChanged))
    assert (change.old_channels, change.channels) == (2, 3)


def test_board_change_delivers_the_third_frame(dec):
    # (A plain "1 2" first would now be judged by the sequenced frames' width: test_plain_forms.py.)
    ev = feed_lines(dec, [b"! channels=2", b"1 2", b"@0 1 2 3", b"@1 1 2 3", b"@2 1 2 3", b"@3 1 2 3"])
    seqs = [f[0] for f in frames(ev)]
    assert seqs == [-1, 2, 3]
    assert dec.stats.lost == 0  # the dropped frames' numbers were seen, so they are not "lost"
    assert isinstance(ev[-2], BoardChanged) and isinstance(ev[-1], FrameBlock)


def test_stream_order_and_timestamps(dec):
    # An info line's channel count makes plain integer columns of that width v1 frames: no hold.
    ev = dec.feed(b"! channels=2\n# a\n1 2\n3 4\n! board=x\n5 6\n", 7.0)
    assert [type(e).__name__ for e in ev] == ["BoardInfo", "Note", "FrameBlock", "BoardInfo", "FrameBlock"]
    assert ev[2].first_index == 0 and ev[4].first_index == 2
    assert np.all(ev[2].t_s == 7.0) and ev[2].readings.dtype == np.int64
    assert ev[2].board_time is None


def test_line_completed_in_a_later_chunk_takes_that_chunks_time(dec):
    assert dec.feed(b"@7 1 2", 1.0) == []
    ev = dec.feed(b" 3\n", 2.0)
    assert flat(ev) == [("frame", 2.0, 7, (1, 2, 3), 0, None)]


def test_stats_count_bytes(dec):
    dec.feed(b"1 2\n3", 0.0)
    assert dec.stats.bytes_in == 5


@pytest.mark.parametrize("scan_min_bytes", [0, 10**9], ids=["bulk-scan", "small-batch"])
def test_clean_frames_take_the_bulk_ways(scan_min_bytes):
    """Guard for the proofs: clean frames really go through the fast ways, not the per-line rules."""
    from protocol.rules import LineRules

    dec = Decoder()
    data = stream([b"! proto=1 channels=3"] + [ck(b"@%d 1 2 3" % i) for i in range(50)])
    with mock.patch.object(fast_module, "SCAN_MIN_BYTES", scan_min_bytes), \
         mock.patch.object(LineRules, "frame", side_effect=AssertionError("per-line frame")) as per_line:
        ev = dec.feed(data, 0.0)
    assert per_line.call_count == 0
    assert [f[0] for f in frames(ev)] == list(range(50))
