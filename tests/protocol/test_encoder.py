"""The encoder writes what PROTOCOL.md says, and refuses what the protocol cannot carry."""

import binascii

import numpy as np
import pytest

from protocol.decoder import Decoder
from protocol.encoder import REQUEST_INFO, encode_frame, encode_frames, encode_info, encode_note

from .helpers import frames


def test_frame_forms():
    assert encode_frame([1, -2, 3], checksum=False) == b"1 -2 3\n"
    assert encode_frame([1, -2, 3], seq=7, checksum=False) == b"@7 1 -2 3\n"
    body = b"@7 1 -2 3"
    # the checksum is the stdlib's crc_hqx from 0xFFFF over the body (CRC-16/CCITT-FALSE)
    assert encode_frame([1, -2, 3], seq=7) == body + b"*%04X\n" % binascii.crc_hqx(body, 0xFFFF)
    assert encode_frame(np.array([5], dtype=np.int16)).startswith(b"5*")


def test_block_encoder_wraps_and_extremes():
    data = encode_frames(np.array([[2**31 - 1, -(2**31)], [0, 0]]), 65535, checksum=False)
    assert data == b"@65535 2147483647 -2147483648\n@0 0 0\n"
    assert encode_frames(np.zeros((0, 3), dtype=np.int64)) == b""


@pytest.mark.parametrize(("call", "message"), [
    (lambda: encode_frame([]), "at least one"),
    (lambda: encode_frame([2**31]), "32-bit"),
    (lambda: encode_frame([1], seq=65536), "0..65535"),
    (lambda: encode_frames(np.array([[2**31]])), "32-bit"),
    (lambda: encode_frames(np.zeros(3)), "shape"),
    (lambda: encode_frames(np.zeros((2, 0))), "shape"),
    (lambda: encode_frames(np.zeros((1, 700)) - 2**31), "line limit"),  # 8400 bytes: over 8192
    (lambda: encode_frame([-(2**31)] * 700), "limit"),
    (lambda: encode_info({}), "at least one"),
    (lambda: encode_info({"board": "two words"}), "spaces"),
    (lambda: encode_info({"a b": 1}), "key"),
    (lambda: encode_note("two\nlines"), "one line"),
    (lambda: encode_note("ends like a sum *BEEF", checksum=False), "four hex"),
])
def test_refusals(call, message):
    with pytest.raises(ValueError, match=message):
        call()


def test_info_values_and_request():
    line = encode_info({"proto": 1, "names": ("a", "b"), "polarity": "-", "rate": 12.5}, checksum=False)
    assert line == b"! proto=1 names=a,b polarity=- rate=12.5\n"
    info = Decoder().feed(line, 0.0)[0]
    assert info.names == ("a", "b") and info.rate_hz == 12.5 and info.polarity == (-1,)
    assert REQUEST_INFO == b"?\n"


def test_drop_partial_keeps_lines_apart():
    dec = Decoder()
    dec.feed(b"! channels=2\n@1 10 2", 0.0)
    assert dec.drop_partial() == 7  # the port went away mid-line
    events = dec.feed(b"0\n@2 10 20\n", 0.0)
    assert frames(events) == [(2, (10, 20))]  # "@1 10 2" + "0" was not glued into a false frame
    assert dec.stats.width_mismatch == 1  # the lone "0" after the gap
