"""Properties: the fast decoder equals the plain one; any cuts give the same events; nothing raises;
memory stays bounded; what the encoder writes decodes back. For v1 lines (with and without a state
field, well-formed or mangled: wrong length, wrong character, blanks, two fields) and for every plain
form (columns, pairs, brackets, leading blanks, a time column, decimals, text lines), any mix of LF, CR
and CRLF line ends, and repeated sequence numbers."""

from unittest import mock

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import protocol.decoder as fast_module
from protocol.decoder import Decoder
from protocol.decoder_plain import PlainDecoder
from protocol.encoder import encode_frame, encode_frames, encode_info, encode_note

from .helpers import ck, flat

SETTINGS = settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])

_value = st.one_of(
    st.integers(-300, 300),
    st.integers(-(2**31), 2**31 - 1),
    st.sampled_from([2**31, -(2**31) - 1, 10**19, -(10**19), 2**64 + 1]),
)
_sep = st.sampled_from([" ", "  ", ",", ", ", " ,", "\t", " \t, ", ",,", " , ,", "", "-", "+", ";"])


@st.composite
def frame_lines(draw):
    values = draw(st.lists(_value, min_size=0, max_size=6))
    seps = [draw(st.sampled_from([" ", ","])) if draw(st.booleans()) else draw(_sep) for _ in values]
    text = ""
    for v, s in zip(values, seps, strict=True):
        zeros = "0" * draw(st.sampled_from([0, 0, 0, 1, 20]))
        digits = zeros + str(abs(v))
        text += ("-" if v < 0 else "") + digits + s
    if not draw(st.booleans()):
        text = text.rstrip(" ,\t")
    if values and draw(st.integers(0, 3)) == 0:
        text += draw(state_field(len(values)))
    if draw(st.booleans()):
        seq = draw(st.one_of(st.integers(0, 65535), st.sampled_from([0, 1, 2, 65534, 65535, 65536, 99999])))
        text = f"@{seq}" + draw(st.sampled_from([" ", " ", ",", "\t", "", " , "])) + text
    return text.encode()


@st.composite
def state_field(draw, width: int) -> str:
    """A frame's state field (PROTOCOL.md section 3): mostly right, sometimes mangled."""
    digits = "".join(draw(st.sampled_from("0123")) for _ in range(width))
    how = draw(st.sampled_from(["none", "good", "good", "good", "short", "long", "char", "blank", "two",
                                "empty", "sep"]))
    if how == "none":
        return ""
    if how == "short":
        digits = digits[:-1]
    elif how == "long":
        digits += draw(st.sampled_from("0123"))
    elif how == "char":
        k = draw(st.integers(0, max(0, width - 1)))
        digits = digits[:k] + draw(st.sampled_from(["4", "9", "x", "-", " ", ","])) + digits[k + 1:]
    elif how == "blank":
        digits = " " + digits
    elif how == "two":
        digits += ";" + digits
    elif how == "empty":
        digits = ""
    elif how == "sep":
        return draw(st.sampled_from([" ", ",", " , "])) + ";" + digits
    return ";" + digits


@st.composite
def stated_frames(draw):
    """Frames with a state field, the encoder's shape or with the other v1 separators, of a common width."""
    width = draw(st.sampled_from([3, 3, 3, 2, 4]))
    values = draw(st.lists(st.integers(-(2**31) - 2, 2**31 + 1), min_size=width, max_size=width))
    seq = draw(st.one_of(st.none(), st.integers(0, 65535), st.integers(0, 65535), st.sampled_from([65536])))
    sep = draw(st.sampled_from([" ", " ", " ", ", ", "\t"]))
    text = sep.join(map(str, values)) + draw(state_field(width))
    return (text if seq is None else f"@{seq} {text}").encode()


@st.composite
def clean_frames(draw):
    """Frames as the encoder writes them (the shape the fast ways take in bulk), of a common width."""
    width = draw(st.sampled_from([3, 3, 3, 2, 4]))
    values = draw(st.lists(st.integers(-(2**31) - 2, 2**31 + 1), min_size=width, max_size=width))
    seq = draw(st.one_of(st.none(), st.integers(0, 65535), st.sampled_from([65536, 99999])))
    text = " ".join(map(str, values))
    return (text if seq is None else f"@{seq} {text}").encode()


_info = st.sampled_from([
    b"! proto=1 board=gh channels=3 rate=100 names=a,b,c polarity=-",
    b"! proto=1 board=gh channels=3 states=1",
    b"! proto=1 channels=2",
    b"! channels=4 fw=1",
    b"! board=x",
    b"! rate=abc",
    b"! proto=1",
    b"!",
])
# Answer lines of section 7 (and lines that only look like them): their own events on both paths.
_answers = st.sampled_from([
    b">val 0 threshold_counts=30 hysteresis_counts=8 touch_debounce_frames=2 "
    b"release_debounce_frames=2 baseline_slow_shift=6 baseline_fast_shift=2 baseline_period_frames=16 "
    b"stuck_timeout_frames=0 polarity=+",
    b">ok get 0",
    b">ok set 1 threshold_counts=40",
    b">no set 1: hysteresis_counts: 50 must be below the threshold (40)",
    b">ok keep",
    b">no frob: unknown command",
    b">ok keep*ABCD",
    b">maybe",
    b">",
    b">no \xff",
])
_other = st.one_of(
    _info,
    st.just(b"# note"),
    st.just(b""),
    st.just(b"   "),
    st.binary(max_size=12),
    st.text(alphabet="0123456789 ,-@*\t\rABCDEFabcdef", max_size=20).map(str.encode),
    st.text(alphabet="0123; ,-@*", max_size=16).map(str.encode),
    st.just(b"7 " * 4100),  # 8200 bytes: overlong
    _answers,
)


@st.composite
def lines(draw):
    line = draw(st.one_of(frame_lines(), frame_lines(), clean_frames(), clean_frames(), stated_frames(),
                          stated_frames(), _other))
    mode = draw(st.sampled_from(["none", "none", "good", "good", "good", "lower", "bad"]))
    if mode == "good":
        line = ck(line)
    elif mode == "lower":
        line = ck(line).lower()
    elif mode == "bad":
        line = ck(line)[:-1] + b"Z"[:0] + (b"0" if ck(line)[-1:] != b"0" else b"1")
    if draw(st.integers(0, 5)) == 0:
        line += b"\r"
    return line


_ends = st.sampled_from([b"\n", b"\n", b"\r\n", b"\r"])


def joined(draw, items: list[bytes]) -> bytes:
    """Lines with a line end each, LF, CRLF or a lone CR, drawn per line."""
    return b"".join(line + draw(_ends) for line in items)


@st.composite
def streams(draw):
    body = joined(draw, draw(st.lists(st.one_of(lines(), lines(), plain_lines()), max_size=60)))
    if draw(st.booleans()):
        body += draw(st.binary(max_size=30))
    return body


# -- plain forms ---------------------------------------------------------------------------------------
_names = st.sampled_from(["a", "b", "zone1", "T0", "T1", "t", "ms", "x.y", "ch-2", "k_3", "0", "Zz"])
_number = st.one_of(
    st.integers(-300, 300).map(str),
    st.integers(900, 40000).map(str),
    st.decimals(-5000, 5000, places=2, allow_nan=False, allow_infinity=False).map(str),
    st.decimals(-50, 50, places=3, allow_nan=False, allow_infinity=False).map(str),
    st.sampled_from(["2147483647", "-2147483648", "2147483648", "21474836.48", "0.5", "-0.25", "007",
                     "1.", ".5", "1.2.3", "4294967295", "99999999999999999999"]),
)


@st.composite
def plain_lines(draw):
    """One line of a plain form, well-formed or a little off."""
    kind = draw(st.sampled_from(["columns", "pairs", "brackets", "text", "mixed"]))
    values = draw(st.lists(_number, min_size=1, max_size=4))
    lead = draw(st.sampled_from(["", "", " ", "   ", "\t"]))
    if kind == "text":
        return draw(st.sampled_from([b"Hello from the board", b"calibrating...", b"Status: 5 errors",
                                     b"ets Jun  8 2016 rst:0x1", b"boot ok", b"x"]))
    if kind == "columns":
        width = draw(st.sampled_from([0, 0, 6, 8]))
        sep = draw(st.sampled_from([" ", ", ", ",", "\t", " ,"]))
        text = sep.join(v.rjust(width) for v in values)
    else:
        eq = draw(st.sampled_from([":", ":", "=", ": "]))
        sep = draw(st.sampled_from([" ", ", ", ",", "  ", ""]))
        named = list(zip([draw(_names) for _ in values], values, strict=True))
        if kind == "brackets":
            items = [f"{n}:[{draw(st.sampled_from(['', ' ', '  ']))}{v}]" for n, v in named]
        elif kind == "pairs":
            items = [f"{n}{eq}{v}" for n, v in named]
        else:
            items = [f"{n}{eq}{v}" if k % 2 else f"{n}:[{v}]" for k, (n, v) in enumerate(named)]
        text = sep.join(items)
    if draw(st.booleans()):
        text += draw(st.sampled_from([" ", ",", ", "]))
    return (lead + text).encode()


@st.composite
def board_streams(draw):
    """What one board prints: a plain form (a time column, decimals, names) with notes, comments,
    strays, info lines and sequenced frames now and then, and line ends of every kind."""
    kind = draw(st.sampled_from(["columns", "pairs", "brackets"]))
    width = draw(st.integers(1, 4))
    names = [draw(_names) for _ in range(width)]
    decimals = draw(st.sampled_from([0, 0, 1, 2]))
    timed = draw(st.booleans())
    t = draw(st.integers(0, 10**6))
    base = draw(st.sampled_from([1, 10, 1000]))
    lead = draw(st.sampled_from(["", "  "]))
    out = []
    for _ in range(draw(st.integers(0, 40))):
        roll = draw(st.integers(0, 29))
        if roll == 0:
            out.append(draw(st.one_of(_info, st.just(b"# comment"), st.just(b"Calibrating, please wait"),
                                      plain_lines(), frame_lines(), st.just(b""))))
            continue
        if roll == 1:
            line = b"@%d 5 6" % draw(st.sampled_from([0, 1, 7, 7, 65535]))
            out.append(draw(st.sampled_from([line, line, line + b";02", b"5 6;31", b"5 6;3"])))
            continue
        if roll == 2:
            t -= draw(st.integers(1, 500))  # the board restarted (or a wild value)
        else:
            t += base + draw(st.integers(0, base // 4)) if roll != 4 else 6 * base  # mostly steady
        cells = [draw(st.integers(-2000, 40000)) for _ in range(width)]
        places = decimals + (1 if roll == 3 else 0)  # now and then one decimal more than the rest
        texts = [f"{c / 10**places:.{places}f}" if places else str(c) for c in cells]
        if kind == "columns":
            body = " ".join(texts)
        elif kind == "pairs":
            body = ", ".join(f"{n}:{v}" for n, v in zip(names, texts, strict=True))
        else:
            body = " ".join(f"{n}:[ {v}]" for n, v in zip(names, texts, strict=True)) + " "
        if timed:
            body = (f"{t} " if kind == "columns" else f"ms={t} ") + body
        out.append((lead + body).encode())
    return joined(draw, out)


@st.composite
def repeated_seq_streams(draw):
    """Sequenced frames whose numbers repeat in runs (a flood of one frame), step on, jump and wrap."""
    seq, out = draw(st.integers(0, 65535)), []
    for _ in range(draw(st.integers(0, 12))):
        for _ in range(draw(st.sampled_from([1, 1, 2, 3, 9, 40]))):
            out.append(b"@%d 1 2" % seq)
        seq = (seq + draw(st.sampled_from([1, 1, 1, 2, 0, 300, 65000]))) % 65536
    return b"".join(line + b"\n" for line in out)


@st.composite
def cuts(draw, data):
    points = sorted(draw(st.lists(st.integers(0, len(data)), max_size=8)))
    pieces, last = [], 0
    for p in [*points, len(data)]:
        pieces.append(data[last:p])
        last = p
    return pieces


def run(decoder, pieces, t_s=1.0):
    events = []
    for piece in pieces:
        events += decoder.feed(piece, t_s)
    events += decoder.flush_hold(t_s)  # the end of the stream: lines held for a form are let go
    return flat(events), decoder.stats.as_dict()


def assert_all_ways_agree(pieces):
    expected = run(PlainDecoder(), pieces)
    with mock.patch.object(fast_module, "SCAN_MIN_BYTES", 0):  # force the bulk scan even for one line
        assert run(Decoder(), pieces) == expected
    with mock.patch.object(fast_module, "SCAN_MIN_BYTES", 10**9):  # and the small-batch way
        assert run(Decoder(), pieces) == expected
    return expected


@SETTINGS
@given(st.data())
def test_fast_equals_plain_for_any_stream_and_cuts(data):
    raw = data.draw(streams())
    assert_all_ways_agree(data.draw(cuts(raw)))


@SETTINGS
@given(st.data())
def test_fast_equals_plain_and_cuts_do_not_matter_for_plain_forms(data):
    raw = data.draw(board_streams())
    whole = assert_all_ways_agree([raw])
    pieces = data.draw(cuts(raw))
    assert assert_all_ways_agree(pieces) == whole
    assert run(PlainDecoder(), [raw[i : i + 1] for i in range(len(raw))]) == whole


@SETTINGS
@given(st.data())
def test_repeated_sequence_numbers_are_reported_the_same_for_any_cuts(data):
    raw = data.draw(repeated_seq_streams())
    whole = assert_all_ways_agree([raw])
    assert assert_all_ways_agree(data.draw(cuts(raw))) == whole
    events, stats = whole
    faults = [dict(e[1]) for e in events if e[0] == "LinkFault"]
    repeats = [f["count"] for f in faults if "REPEATED" in f["kind"]]
    total = stats.get("repeated", 0)
    # Reported at the 1st, 2nd, 4th, 8th... repeat, each report counting the repeats since the last one.
    assert len(repeats) == (total.bit_length() if total else 0)
    assert sum(int(c) for c in repeats) == (1 << (total.bit_length() - 1) if total else 0)


@SETTINGS
@given(st.data())
def test_any_cuts_give_the_same_events(data):
    raw = data.draw(streams())
    whole = run(Decoder(), [raw])
    assert run(Decoder(), data.draw(cuts(raw))) == whole
    assert run(PlainDecoder(), [raw[i : i + 1] for i in range(len(raw))]) == whole


@SETTINGS
@given(st.lists(st.binary(max_size=3000), max_size=12))
def test_arbitrary_bytes_never_raise_and_memory_stays_bounded(chunks):
    for dec in (Decoder(), PlainDecoder()):
        for chunk in chunks:
            dec.feed(chunk, 0.0)
            assert dec._framer.buffered_bytes <= 8192
            hold = dec._rules._hold
            assert hold is None or (len(hold.data) < 8 and len(hold.lines) < 64)
        assert dec.stats.bytes_in == sum(map(len, chunks))
        assert dec.stats.extra.get("scan_fallbacks", 0) == 0


@SETTINGS
@given(
    st.integers(1, 40),
    st.integers(1, 12),
    st.one_of(st.none(), st.integers(0, 65535)),
    st.booleans(),
    st.integers(0, 2**32),
)
def test_block_encoder_round_trip(n, channels, first_seq, checksum, seed):
    rng = np.random.default_rng(seed)
    block = rng.integers(-(2**31), 2**31, size=(n, channels))
    data = encode_frames(block, first_seq, checksum)
    assert data == b"".join(
        encode_frame(row, None if first_seq is None else (first_seq + i) % 65536, checksum)
        for i, row in enumerate(block)
    )
    dec = Decoder()
    # Plain frames as a v1 board sends them: after an info line with the channel count (read at once).
    head = encode_info({"channels": channels}, checksum) if first_seq is None else b""
    events = dec.feed(head + data, 0.0)
    rows = [f for f in flat(events) if f[0] == "frame"]
    assert [r[3] for r in rows] == [tuple(r) for r in block.tolist()]
    if first_seq is not None:
        assert [r[2] for r in rows] == [(first_seq + i) % 65536 for i in range(n)]
    assert dec.stats.lost == dec.stats.resets == dec.stats.garbled == dec.stats.bad_checksum == 0


@SETTINGS
@given(
    st.dictionaries(
        st.text(alphabet="abcdefghijklmnopqrstuvwxyz_", min_size=1, max_size=8).filter(
            lambda k: k not in ("proto", "channels", "rate", "names", "polarity", "board", "method", "fw")
        ),
        st.text(alphabet="abcdefghijklmnopqrstuvwxyz0123456789,._-", max_size=10),
        max_size=5,
    ),
    st.text(alphabet="abc xyz 123!@#*", max_size=30),
    st.booleans(),
)
def test_info_and_note_round_trip(extra, note, checksum):
    fields = {"proto": 1, "board": "greenhouse", "channels": 2, "names": ["zone1", "stop"], **extra}
    dec = Decoder()
    events = dec.feed(encode_info(fields, checksum) + encode_note(note, checksum=True), 0.0)
    info, note_ev = events
    assert info.fields == {k: (",".join(v) if isinstance(v, list) else str(v)) for k, v in fields.items()}
    assert info.names == ("zone1", "stop") and note_ev.text == note.strip(" \t")


@SETTINGS
@given(
    st.integers(1, 40),
    st.integers(1, 12),
    st.one_of(st.none(), st.integers(0, 65535)),
    st.booleans(),
    st.integers(0, 2**32),
)
def test_state_fields_decode_to_board_states(n, channels, first_seq, checksum, seed):
    """Frames with a state field as a board writes them (`;` and one digit 0-3 per channel, before the
    checksum, the CRC written here with binascii.crc_hqx) come out as `board_states`, the same by every
    way; frames without one carry None."""
    rng = np.random.default_rng(seed)
    block = rng.integers(-(2**31), 2**31, size=(n, channels))
    states = rng.integers(0, 4, size=(n, channels))
    lines = []
    for i in range(n):
        body = " ".join(map(str, block[i].tolist())) + ";" + "".join(map(str, states[i].tolist()))
        if first_seq is not None:
            body = f"@{(first_seq + i) % 65536} " + body
        lines.append(ck(body.encode()) if checksum else body.encode())
    head = encode_info({"proto": 1, "channels": channels, "states": 1}, checksum)
    events, stats = assert_all_ways_agree([head + b"".join(line + b"\n" for line in lines)])
    frames = [f for f in events if f[0] == "frame"]
    assert [f[3] for f in frames] == [tuple(r) for r in block.tolist()]
    assert [f[5] for f in frames] == [tuple(r) for r in states.tolist()]
    assert stats["garbled"] == stats["bad_checksum"] == stats["lost"] == 0


@pytest.mark.parametrize("field, why", [
    (b";01", "state field of 2 digits for 3 values"),
    (b";0123", "state field of 4 digits for 3 values"),
    (b";", "state field of 0 digits for 3 values"),
    (b";014", "other than 0, 1, 2, 3"),
    (b"; 01", "other than 0, 1, 2, 3"),
    (b";0;1", "other than 0, 1, 2, 3"),
    (b"; 012", "state field of 4 digits for 3 values"),
])
@pytest.mark.parametrize("head", [b"@1 7 8 9", b"7 8 9"])
def test_a_mangled_state_field_is_garbled_the_same_by_every_way(field, why, head):
    first = b"@0 1 2 3;000" if head.startswith(b"@") else b"1 2 3;000"
    last = b"@2 4 5 6;210" if head.startswith(b"@") else b"4 5 6;210"
    lines = [b"! proto=1 channels=3 states=1", first, head + field, last]
    for checked in (False, True):
        data = b"".join((ck(line) if checked else line) + b"\n" for line in lines)
        events, stats = assert_all_ways_agree([data])
        assert stats["garbled"] == 1 and stats["frames"] == 2
        faults = [dict(e[1]) for e in events if e[0] == "LinkFault"]
        assert any(why in f["detail"] for f in faults), faults
        assert [f[5] for f in events if f[0] == "frame"] == [(0, 0, 0), (2, 1, 0)]
