"""Properties: the fast decoder equals the plain one; any cuts give the same events; nothing raises;
memory stays bounded; what the encoder writes decodes back."""

from unittest import mock

import numpy as np
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
    if draw(st.booleans()):
        seq = draw(st.one_of(st.integers(0, 65535), st.sampled_from([0, 1, 2, 65534, 65535, 65536, 99999])))
        text = f"@{seq}" + draw(st.sampled_from([" ", " ", ",", "\t", "", " , "])) + text
    return text.encode()


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
    b"! proto=1 channels=2",
    b"! channels=4 fw=1",
    b"! board=x",
    b"! rate=abc",
    b"! proto=1",
    b"!",
])
_other = st.one_of(
    _info,
    st.just(b"# note"),
    st.just(b""),
    st.just(b"   "),
    st.binary(max_size=12),
    st.text(alphabet="0123456789 ,-@*\t\rABCDEFabcdef", max_size=20).map(str.encode),
    st.just(b"7 " * 520),
)


@st.composite
def lines(draw):
    line = draw(st.one_of(frame_lines(), frame_lines(), clean_frames(), clean_frames(), _other))
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


@st.composite
def streams(draw):
    body = b"".join(line + b"\n" for line in draw(st.lists(lines(), max_size=60)))
    if draw(st.booleans()):
        body += draw(st.binary(max_size=30))
    return body


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
    return flat(events), decoder.stats.as_dict()


@SETTINGS
@given(st.data())
def test_fast_equals_plain_for_any_stream_and_cuts(data):
    raw = data.draw(streams())
    pieces = data.draw(cuts(raw))
    expected = run(PlainDecoder(), pieces)
    with mock.patch.object(fast_module, "SCAN_MIN_BYTES", 0):  # force the bulk scan even for one line
        assert run(Decoder(), pieces) == expected
    with mock.patch.object(fast_module, "SCAN_MIN_BYTES", 10**9):  # and the small-batch way
        assert run(Decoder(), pieces) == expected


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
            assert dec._framer.buffered_bytes <= 1024
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
    events = dec.feed(data, 0.0)
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
