"""Checking and converting a whole batch of lines at once with numpy (the decoder's fast path).

`scan()` looks at every line of a batch in a few vectorised passes and marks the lines that are
well-formed frames, with their checksum, sequence number and values; the numbers of all of them are
converted by one `np.fromstring` call. The marks must agree exactly with `protocol.rules.parse_frame`
and `LineRules.line`: every line the scan does not vouch for goes through those per-line rules, and
tests/protocol prove with hypothesis that both paths give the same events and statistics.

State fields (`;` and one digit 0-3 per value, PROTOCOL.md section 3): only looked for when the batch
holds a `;` at all, so frames without them pay one byte search. A frame's field is masked out of the
number conversion and its length checked against the frame's width; `Scan.semi` says where it starts.

Checksums: `binascii.crc_hqx` runs over each whole line (its checksum suffix included) in one `map`,
and CRC linearity turns "CRC(body) == carried value" into "CRC(line) == table[carried value]"
(see `_whole_line_crc_table`), one look-up per line.
"""

from __future__ import annotations

import binascii
import itertools
from dataclasses import dataclass

import numpy as np

from protocol.crc import CRC_INIT
from protocol.rules import INT32_MAX, INT32_MIN, SEQ_MODULUS

_CRC_BYTE = np.array([binascii.crc_hqx(bytes([i]), 0) for i in range(256)], dtype=np.int64)
_ZERO_HI = {k: np.array([binascii.crc_hqx(bytes(k), x << 8) for x in range(256)]) for k in (5, 6)}
_ZERO_LO = {k: np.array([binascii.crc_hqx(bytes(k), x) for x in range(256)]) for k in (5, 6)}


def _whole_line_crc_table() -> np.ndarray:
    """[case * 2 + cr, H]: the CRC of a whole line `body*HHHH` (+ CR) whose body's CRC is H.

    CRC linearity: CRC(init, body + suffix) = Z(CRC(init, body)) ^ CRC(0, suffix), where Z runs the
    register over as many zero bytes as the suffix is long. case 0 writes hex upper-case, 1 lower.
    """
    carried = np.arange(65536, dtype=np.int64)
    nibbles = [(carried >> shift) & 15 for shift in (12, 8, 4, 0)]
    table = np.empty((4, 65536), dtype=np.int64)
    for case, letter in enumerate((0x41, 0x61)):
        suffix = np.zeros(65536, dtype=np.int64)
        chars = [np.full(65536, 0x2A), *(np.where(n < 10, 0x30 + n, letter + n - 10) for n in nibbles)]
        for cr in (0, 1):
            crc = suffix.copy()
            for ch in chars + ([np.full(65536, 0x0D)] if cr else []):
                crc = ((crc << 8) & 0xFFFF) ^ _CRC_BYTE[(crc >> 8) ^ ch]
            k = 5 + cr
            table[case * 2 + cr] = _ZERO_HI[k][carried >> 8] ^ _ZERO_LO[k][carried & 0xFF] ^ crc
    return table


_WHOLE_LINE_CRC = _whole_line_crc_table()
_HEX = np.full(256, 255, dtype=np.int64)
for _i, _c in enumerate(b"0123456789abcdef"):
    _HEX[_c] = _i
for _i, _c in enumerate(b"ABCDEF"):
    _HEX[_c] = 10 + _i
_MAX_DIGITS = 18


def _parser_saturates() -> bool:
    """True when np.fromstring turns every too-long integer into a value outside int32 (seen in numpy 2.x).

    Then over-long digit runs need no check of their own: the range check sends their lines the
    per-line way. Otherwise the scan looks for such runs explicitly (slower, same result).
    """
    probe = b"18446744073709551617 -18446744073709551617 36893488147419103233 -9223372036854775809"
    values = np.fromstring(probe, dtype=np.int64, sep=" ")
    return len(values) == 4 and bool(((values < INT32_MIN) | (values > INT32_MAX)).all())


_SATURATES = _parser_saturates()


class ScanMismatch(RuntimeError):
    """The bulk conversion did not find the numbers the checks promised (a bug; fall back)."""


@dataclass(slots=True)
class Scan:
    """Per-line results for a batch of `n` lines; `line(i)` gives line i's raw bytes (no LF)."""

    buf: bytes
    starts: np.ndarray  # int64 (n,) first byte of each line
    ends: np.ndarray  # int64 (n,) index of each line's LF
    frame_ok: np.ndarray  # bool (n,) a well-formed frame whose checksum, if it has one, is right
    checked: np.ndarray  # bool (n,) carries a checksum
    sequenced: np.ndarray  # bool (n,)
    width: np.ndarray  # int64 (n,) number of values (0 where not frame_ok)
    numbers: np.ndarray  # int64 all numbers of the candidate frame lines (seq first), in order
    offset: np.ndarray  # int64 (n,) where each line's numbers start in `numbers`
    semi: np.ndarray | None  # int64 (n,) each line's state field's `;`, -1: none (None: no `;` at all)

    def line(self, i: int) -> bytes:
        return self.buf[int(self.starts[i]) : int(self.ends[i])]


def _after(a: np.ndarray) -> np.ndarray:
    """a shifted one place right: out[p] = a[p-1], out[0] = False."""
    out = np.empty_like(a)
    out[0] = False
    out[1:] = a[:-1]
    return out


def scan(buf: bytes, max_line_bytes: int) -> Scan:
    """Scan `buf`, which holds complete lines and ends with LF."""
    arr = np.frombuffer(buf, dtype=np.uint8)
    is_lf = arr == 0x0A
    ends = np.flatnonzero(is_lf)
    starts = np.empty_like(ends)
    starts[0] = 0
    starts[1:] = ends[:-1] + 1
    length = ends - starts
    has_cr = (arr[ends - 1] == 0x0D) & (length > 0)
    stop = ends - has_cr  # end of the line without its CR
    raw = [arr[np.maximum(stop - k, 0)] for k in (4, 3, 2, 1)]
    hexes = [_HEX[r] for r in raw]
    checked = (stop - starts >= 5) & (arr[np.maximum(stop - 5, 0)] == 0x2A)
    for h in hexes:
        checked &= h < 16
    body_end = np.where(checked, stop - 5, stop)
    head = arr[starts]
    sequenced = head == 0x40
    candidate = (sequenced | (head - np.uint8(0x30) < 10) | (head == 0x2D)) & (length <= max_line_bytes)

    is_digit = arr - np.uint8(0x30) < 10
    is_minus = arr == 0x2D
    is_num = is_digit | is_minus
    is_space = (arr == 0x20) | (arr == 0x09)
    is_comma = arr == 0x2C
    is_at = arr == 0x40
    bad = ~(is_num | is_space | is_comma | is_at)
    semi = None
    if b";" in buf:
        semi = _state_fields(arr, starts, body_end, is_num, bad)
    _mark_bad_minus(is_minus, is_digit, is_space, is_comma, is_lf, bad)
    _mark_bad_at(arr, is_at, bad)
    _mark_double_commas(is_space, is_comma, bad)
    if not _SATURATES:
        _mark_long_digit_runs(is_digit, bad)
    token_start = is_num & ~_after(is_num)
    bounds = np.empty(2 * len(starts), dtype=np.int64)
    bounds[0::2] = starts
    bounds[1::2] = np.maximum(body_end, starts)
    tokens = np.add.reduceat(token_start.view(np.uint8), bounds, dtype=np.int64)[0::2]
    bad_bytes = np.add.reduceat(bad.view(np.uint8), bounds, dtype=np.int64)[0::2]
    second = arr[np.minimum(starts + 1, len(arr) - 1)] - np.uint8(0x30) < 10
    frame_ok = candidate & (body_end > starts) & (bad_bytes == 0) & (tokens > sequenced)
    frame_ok &= ~sequenced | second
    width = np.where(frame_ok, tokens - sequenced, 0)
    if semi is not None:  # a state field holds exactly one digit per value
        stated = semi >= 0
        frame_ok &= ~stated | (body_end - semi - 1 == width)
        width = np.where(frame_ok, width, 0)

    numbers, offset = _convert(arr, is_num, frame_ok, tokens, starts, ends, stop, checked)
    frame_ok &= _in_range(numbers, offset, frame_ok, sequenced)
    _check_crcs(buf, frame_ok, checked, has_cr, raw, hexes)
    return Scan(buf, starts, ends, frame_ok, checked, sequenced, width, numbers, offset, semi)


def _state_fields(arr: np.ndarray, starts: np.ndarray, body_end: np.ndarray, is_num: np.ndarray,
                  bad: np.ndarray) -> np.ndarray:
    """Per line, where its state field's `;` is (-1: none). The field's bytes leave `is_num` (they are
    not values); a byte in it other than 0-3, or a second `;`, is `bad`. Updates both in place."""
    semi = np.full(len(starts), -1, dtype=np.int64)
    pos = np.flatnonzero(arr == 0x3B)
    line = np.searchsorted(starts, pos, side="right") - 1
    inside = pos < body_end[line]  # a `;` at or past the checksum's `*` is bad anyway (not a field)
    pos, line = pos[inside], line[inside]
    first = np.ones(len(pos), dtype=bool)
    first[1:] = line[1:] != line[:-1]
    bad[pos[~first]] = True  # a second `;` in a line
    pos, line = pos[first], line[first]
    semi[line] = pos
    mark = np.zeros(len(arr) + 1, dtype=np.int8)  # +1 at each field's `;`, -1 at its end (all distinct)
    mark[pos] = 1
    mark[body_end[line]] = -1
    field = np.cumsum(mark[:-1], dtype=np.int32).astype(bool)
    is_num &= ~field
    bad[field & ~((arr - np.uint8(0x30)) < 4)] = True
    bad[pos] = False  # the `;` itself opens the field
    return semi


def _mark_bad_minus(
    is_minus: np.ndarray, is_digit: np.ndarray, is_space: np.ndarray, is_comma: np.ndarray,
    is_lf: np.ndarray, bad: np.ndarray,
) -> None:
    """A minus must start a value: after a separator or at the line start, and before a digit."""
    pos = np.flatnonzero(is_minus)
    if not len(pos):
        return
    before = np.maximum(pos - 1, 0)
    after_ok = is_space[before] | is_comma[before] | is_lf[before] | (pos == 0)
    bad[pos[~after_ok | ~is_digit[pos + 1]]] = True


def _mark_bad_at(arr: np.ndarray, is_at: np.ndarray, bad: np.ndarray) -> None:
    """`@` may only open a line."""
    pos = np.flatnonzero(is_at)
    if len(pos):
        bad[pos[(pos > 0) & (arr[np.maximum(pos - 1, 0)] != 0x0A)]] = True


def _mark_double_commas(is_space: np.ndarray, is_comma: np.ndarray, bad: np.ndarray) -> None:
    """Two commas with only spaces or tabs between them leave an empty value."""
    pos = np.flatnonzero(is_comma)
    if len(pos) < 2:
        return
    non_space = np.cumsum(~is_space, dtype=np.int32)
    between = non_space[pos[1:] - 1] - non_space[pos[:-1]]
    bad[pos[1:][between == 0]] = True


def _mark_long_digit_runs(is_digit: np.ndarray, bad: np.ndarray) -> None:
    run_start = np.flatnonzero(is_digit & ~_after(is_digit))
    run_end = np.flatnonzero(is_digit & ~np.append(is_digit[1:], False))
    bad[run_start[run_end - run_start >= _MAX_DIGITS]] = True


def _convert(
    arr: np.ndarray,
    is_num: np.ndarray,
    frame_ok: np.ndarray,
    tokens: np.ndarray,
    starts: np.ndarray,
    ends: np.ndarray,
    stop: np.ndarray,
    checked: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    """All numbers of the frame lines with one np.fromstring call, and where each line's begin."""
    text = np.where(is_num, arr, np.uint8(0x20))
    for k in (1, 2, 3, 4):  # hex digits of checksums are not values
        text[(stop - k)[checked]] = 0x20
    others = np.flatnonzero(~frame_ok & (ends > starts))
    if len(others) > 64:
        mark = np.zeros(len(text) + 1, dtype=np.int32)
        mark[starts[others]] += 1
        mark[ends[others]] -= 1
        text[np.cumsum(mark[:-1], dtype=np.int32) > 0] = 0x20
    else:
        for i in others.tolist():
            text[starts[i] : ends[i]] = 0x20
    counts = np.where(frame_ok, tokens, 0)
    offset = np.cumsum(counts) - counts
    expected = int(counts.sum())
    if not expected:  # np.fromstring reads text of nothing but spaces as one 0
        return np.zeros(0, dtype=np.int64), offset
    numbers = np.fromstring(text.tobytes(), dtype=np.int64, sep=" ")
    if len(numbers) != expected:
        raise ScanMismatch(f"found {len(numbers)} numbers, expected {expected}")
    return numbers, offset


def _in_range(
    numbers: np.ndarray, offset: np.ndarray, frame_ok: np.ndarray, sequenced: np.ndarray
) -> np.ndarray:
    ok = np.ones(len(frame_ok), dtype=bool)
    outside = np.flatnonzero((numbers < INT32_MIN) | (numbers > INT32_MAX))
    seq_lines = np.flatnonzero(frame_ok & sequenced)
    if len(seq_lines):
        ok[seq_lines[numbers[offset[seq_lines]] >= SEQ_MODULUS]] = False
    if len(outside):
        lines_ok = np.flatnonzero(frame_ok)
        ok[lines_ok[np.searchsorted(offset[lines_ok], outside, side="right") - 1]] = False
    return ok


def _check_crcs(
    buf: bytes,
    frame_ok: np.ndarray,
    checked: np.ndarray,
    has_cr: np.ndarray,
    raw: list[np.ndarray],
    hexes: list[np.ndarray],
) -> None:
    """Clear frame_ok where the carried checksum is wrong (those lines take the per-line way)."""
    lines = np.flatnonzero(frame_ok & checked)
    if not len(lines):
        return
    whole = buf.split(b"\n")
    whole.pop()
    crc_all = np.fromiter(
        map(binascii.crc_hqx, whole, itertools.repeat(CRC_INIT)), dtype=np.int64, count=len(whole)
    )
    given = (hexes[0][lines] << 12) | (hexes[1][lines] << 8) | (hexes[2][lines] << 4) | hexes[3][lines]
    digits = [r[lines] for r in raw]
    lower = np.maximum(np.maximum(digits[0], digits[1]), np.maximum(digits[2], digits[3])) >= 0x61
    upper = np.zeros(len(lines), dtype=bool)
    for d in digits:
        upper |= (d >= 0x41) & (d <= 0x46)
    table = lower * 2 + has_cr[lines]
    # Mixed-case hex (C8f8) must take the per-line way: the whole-line CRC is linear, so a wrong value
    # spelled in mixed case can meet the lower-case table's entry (found by the reliability fuzz).
    wrong = (crc_all[lines] != _WHOLE_LINE_CRC[table, given]) | (lower & upper)
    frame_ok[lines[wrong]] = False
