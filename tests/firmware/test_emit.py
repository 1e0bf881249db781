"""The C emitter (devices/firmware/pt_emit.c) read back by padtune's own decoder: every line kind, the
checksums, the numbers at their limits. The emitter runs under the sanitizers, through emit_probe.c.

Outside references: the CRC check value 0x29B1 of b"123456789" is the published catalogue's
(CRC-16/IBM-3740, alias CRC-16/CCITT-FALSE); every other checksum is compared with Python's stdlib
`binascii.crc_hqx(body, 0xFFFF)`, which computes the same CRC independently, in C.
"""

from __future__ import annotations

import binascii
import re

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from protocol.decoder import Decoder
from protocol.events import BoardInfo, FrameBlock, Note
from tests.firmware import c_build

INT32_MIN, INT32_MAX = -(1 << 31), (1 << 31) - 1


def probe(script: str) -> bytes:
    return c_build.run(c_build.emit_probe(), [], script.encode("ascii"))


def decode(data: bytes) -> tuple[list, Decoder]:
    dec = Decoder()
    events = dec.feed(data, 0.0)
    return events, dec


def frames_of(events: list) -> tuple[np.ndarray, np.ndarray]:
    blocks = [e for e in events if isinstance(e, FrameBlock)]
    return np.concatenate([b.seq for b in blocks]), np.concatenate([b.readings for b in blocks])


def assert_checksums(data: bytes) -> None:
    """Every line ends with the CRC of its body (stdlib binascii as the reference)."""
    for line in data.splitlines():
        body, _, crc = line.rpartition(b"*")
        assert re.fullmatch(rb"[0-9A-F]{4}", crc), line
        assert int(crc, 16) == binascii.crc_hqx(body, 0xFFFF), line


def test_crc_check_value_of_the_catalogue():
    assert probe("L 123456789\n") == b"123456789*29B1\n"


def test_frames_at_the_limits_decode_to_the_same_values():
    rows = [[0, INT32_MIN, INT32_MAX, -1], [1, -2, 2147483646, -2147483647], [10, 100, 1000, 1000000000]]
    seqs = [65534, 65535, 0]  # wraps
    script = "".join(f"F {s} - {' '.join(map(str, r))}\n" for s, r in zip(seqs, rows, strict=True))
    for checksum in (1, 0):
        out = probe(f"K {checksum}\n" + script)
        events, dec = decode(out)
        seq, readings = frames_of(events)
        assert seq.tolist() == seqs
        assert readings.tolist() == rows
        assert (dec.stats.garbled, dec.stats.bad_checksum, dec.stats.lost, dec.stats.resets) == (0, 0, 0, 0)
        if checksum:
            assert_checksums(out)
        else:
            assert b"*" not in out


def test_the_widest_frame_fits_the_line_limit():
    """512 channels of -2147483648 at seq 65535 is PROTOCOL.md's 6157-byte example (CRLF counted)."""
    out = probe(f"F 65535 - {' '.join([str(INT32_MIN)] * 512)}\n")
    assert len(out) == 6157 - 1  # LF only
    events, dec = decode(out)
    assert frames_of(events)[1].shape == (1, 512)
    assert dec.stats.garbled == dec.stats.overlong == 0


@settings(max_examples=25, deadline=None)
@given(st.integers(1, 12).flatmap(lambda n: st.lists(
    st.lists(st.integers(INT32_MIN, INT32_MAX), min_size=n, max_size=n), min_size=1, max_size=40)),
    st.integers(0, 65535))
def test_random_frames_decode_to_the_same_values(rows, first_seq):
    script = "".join(f"F {(first_seq + i) % 65536} - {' '.join(map(str, r))}\n" for i, r in enumerate(rows))
    out = probe(script)
    assert_checksums(out)
    events, dec = decode(out)
    seq, readings = frames_of(events)
    assert readings.tolist() == rows
    assert seq.tolist() == [(first_seq + i) % 65536 for i in range(len(rows))]
    assert dec.stats.lost == dec.stats.garbled == dec.stats.bad_checksum == 0


def test_state_field_follows_the_contract():
    """`@12 512 498 1020;020*HHHH`: one digit per channel, before the checksum (PROTOCOL.md section 3)."""
    out = probe("F 12 020 512 498 1020\nF 13 3120 -5 0 7 9\n")
    assert out.splitlines()[0].startswith(b"@12 512 498 1020;020*")
    assert_checksums(out)
    parsed = [re.fullmatch(rb"@(\d+)((?: -?\d+)+);([0-3]+)\*[0-9A-F]{4}", line) for line in out.splitlines()]
    assert [(m[1], m[3]) for m in parsed] == [(b"12", b"020"), (b"13", b"3120")]
    events, _ = decode(out[: out.index(b"\n") + 1])
    blocks = [e for e in events if isinstance(e, FrameBlock)]
    if blocks and blocks[0].board_states is not None:  # the decoder reads the field (branch i11-twin)
        assert blocks[0].board_states.tolist() == [[0, 2, 0]]


def test_info_line_decodes_key_by_key():
    out = probe("I 1 greenhouse-c 3 12500 zone1,zone2,stop osc +,-,+ 0.4.1 1 1\n")
    assert_checksums(out)
    events, _ = decode(out)
    info = next(e for e in events if isinstance(e, BoardInfo))
    assert info.proto == 1 and info.new_session
    assert (info.board, info.channels, info.rate_hz) == ("greenhouse-c", 3, 12.5)
    assert info.names == ("zone1", "zone2", "stop")
    assert (info.method, info.fw) == ("osc", "0.4.1")
    assert info.polarity == (1, -1, 1)
    assert (info.fields["settings"], info.fields["states"]) == ("1", "1")


def test_info_line_one_sign_when_all_agree_and_no_proto_for_an_answer():
    out = probe("I 0 b 2 100000 - - -,- - 0 0\n")
    assert out.startswith(b"! board=b channels=2 rate=100 polarity=-*")
    events, _ = decode(out)
    info = next(e for e in events if isinstance(e, BoardInfo))
    assert info.proto is None and info.polarity in ((-1,), (-1, -1))
    assert "settings" not in info.fields and "states" not in info.fields


def test_rates_print_without_floating_point():
    cases = ((1, "0.001"), (12500, "12.5"), (100000, "100"), (1001, "1.001"), (4294967295, "4294967.295"))
    for mhz, text in cases:
        assert probe(f"I 0 - 0 {mhz} - - - - 0 0\n").startswith(f"! rate={text}*".encode())


def test_numbers_at_32_bit_limits():
    out = probe("N -2147483648\nN 2147483647\nN 0\nN -1\nU 4294967295\nU 0\nU 1000000000\n")
    assert [line.split(b"*")[0] for line in out.splitlines()] == [
        b"=-2147483648", b"=2147483647", b"=0", b"=-1", b"=4294967295", b"=0", b"=1000000000"]
    assert_checksums(out)


def test_comments_stay_one_ascii_line_and_never_look_checksummed():
    out = probe("K 0\nC pump house *BEEF\nC tab\\x09and\\x01\\xff bytes\nK 1\nC pump house *BEEF\n")
    events, dec = decode(out)
    notes = [e.text for e in events if isinstance(e, Note)]
    assert notes == ["pump house *BEEF", "tab and?? bytes", "pump house *BEEF"]
    assert dec.stats.bad_checksum == dec.stats.garbled == 0
    # the trailing space keeps the host from reading `*BEEF` as a checksum
    assert out.splitlines()[0] == b"# pump house *BEEF "
