"""CRC-16/CCITT-FALSE against its published check value and against an independent implementation."""

import binascii

from hypothesis import given
from hypothesis import strategies as st

from protocol.crc import CHECK_VALUE, checksum_suffix, crc16_ccitt_false, split_checksum


def bitwise_crc16(data: bytes, poly: int = 0x1021, init: int = 0xFFFF) -> int:
    """Straight from the parameters (width 16, poly 0x1021, init 0xFFFF, no reflection, xorout 0),
    bit by bit, as the catalogue's parametrised model defines them."""
    crc = init
    for byte in data:
        crc ^= byte << 8
        for _ in range(8):
            crc = ((crc << 1) ^ poly) & 0xFFFF if crc & 0x8000 else (crc << 1) & 0xFFFF
    return crc


def test_check_value_from_the_catalogue():
    # The published catalogue of parametrised CRC algorithms, entry CRC-16/IBM-3740
    # (alias CRC-16/CCITT-FALSE): check = 0x29B1 for the ASCII string "123456789".
    assert crc16_ccitt_false(b"123456789") == 0x29B1 == CHECK_VALUE
    assert bitwise_crc16(b"123456789") == 0x29B1


def test_empty_input_is_the_init_value():
    assert crc16_ccitt_false(b"") == 0xFFFF


@given(st.binary(max_size=300))
def test_agrees_with_stdlib_crc_hqx_and_the_bitwise_model(data):
    # Python's stdlib binascii.crc_hqx is the same non-reflected 0x1021 CRC from a given start value.
    assert crc16_ccitt_false(data) == binascii.crc_hqx(data, 0xFFFF) == bitwise_crc16(data)


@given(st.binary(max_size=100), st.binary(max_size=100))
def test_continues_over_pieces(a, b):
    assert crc16_ccitt_false(b, crc16_ccitt_false(a)) == crc16_ccitt_false(a + b)


def test_suffix_and_split():
    assert checksum_suffix(b"123456789") == b"*29B1"
    assert split_checksum(b"abc*29b1") == (b"abc", 0x29B1)  # either case
    assert split_checksum(b"abc*29B") == (b"abc*29B", None)  # not exactly four digits
    assert split_checksum(b"abc*29B1 ") == (b"abc*29B1 ", None)  # must end the line
    assert split_checksum(b"abc*29G1") == (b"abc*29G1", None)
    assert split_checksum(b"*FFFF") == (b"", 0xFFFF)
