"""The line checksum of protocol v1: CRC-16/CCITT-FALSE, and the `*HHHH` suffix that carries it.

Parameters (the published catalogue of parametrised CRC algorithms lists this as CRC-16/IBM-3740,
alias CRC-16/CCITT-FALSE): width 16, poly 0x1021, init 0xFFFF, refin false, refout false,
xorout 0x0000, check 0x29B1 (the CRC of b"123456789"). The stdlib's `binascii.crc_hqx` computes the
same non-reflected 0x1021 CRC from a given start value, in C, so it does the work here.
"""

from __future__ import annotations

import binascii

CRC_INIT = 0xFFFF
CHECK_VALUE = 0x29B1  # of b"123456789", from the catalogue named above
_HEX_DIGITS = frozenset(b"0123456789abcdefABCDEF")


def crc16_ccitt_false(data: bytes | bytearray | memoryview, init: int = CRC_INIT) -> int:
    """CRC-16/CCITT-FALSE of `data`; pass a previous result as `init` to continue over more bytes."""
    return binascii.crc_hqx(data, init)


def checksum_suffix(body: bytes) -> bytes:
    """The `*HHHH` suffix (upper-case hex) a sender appends to `body` to checksum the line."""
    return b"*%04X" % binascii.crc_hqx(body, CRC_INIT)


def split_checksum(line: bytes) -> tuple[bytes, int | None]:
    """Split a line (without CR/LF) into its body and the checksum it carries, or None if it has none.

    A line carries a checksum when it ends with `*` and exactly four hex digits (either case).
    """
    if len(line) >= 5 and line[-5] == 0x2A and all(c in _HEX_DIGITS for c in line[-4:]):
        return line[:-5], int(line[-4:], 16)
    return line, None
