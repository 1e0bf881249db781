"""Writing protocol v1: frames, info lines and notes, as a board (or a simulator, or a test) sends them.

`encode_frames` is the block encoder simulators use: it turns a whole (n, channels) array into lines
with vectorised number formatting, so a simulated board can keep up with any rate a real one sends.
Everything written here decodes back to the same values with `protocol.decoder.Decoder`.
"""

from __future__ import annotations

import binascii
from collections.abc import Iterable, Mapping, Sequence

import numpy as np

from protocol.crc import CRC_INIT, checksum_suffix, split_checksum
from protocol.framing import MAX_LINE_BYTES
from protocol.rules import INT32_MAX, INT32_MIN, SEQ_MODULUS

REQUEST_INFO = b"?\n"  # host to board: please send your info line again
__all__ = ["MAX_LINE_BYTES", "REQUEST_INFO", "encode_answer", "encode_frame", "encode_frames", "encode_info",
           "encode_note"]


def _finish(body: bytes, checksum: bool) -> bytes:
    line = body + checksum_suffix(body) if checksum else body
    if len(line) > MAX_LINE_BYTES:
        raise ValueError(f"line of {len(line)} bytes is over the protocol's {MAX_LINE_BYTES}-byte limit")
    return line + b"\n"


def _check_seq(seq: int) -> None:
    if not 0 <= seq < SEQ_MODULUS:
        raise ValueError(f"sequence number {seq} is outside 0..65535")


def _state_field(states: Sequence[int] | np.ndarray, width: int) -> bytes:
    """`;` and one digit 0-3 per channel (PROTOCOL.md section 3, the optional state field)."""
    digits = [int(s) for s in states]
    if len(digits) != width or not all(0 <= s <= 3 for s in digits):
        raise ValueError(f"a state field is one state 0..3 per channel ({width}), not {digits!r}")
    return b";" + bytes(48 + s for s in digits)


def encode_frame(
    readings: Sequence[int] | np.ndarray, seq: int | None = None, checksum: bool = True,
    states: Sequence[int] | np.ndarray | None = None,
) -> bytes:
    """One frame line: `@seq v0 v1 ...` (or plain `v0 v1 ...` without seq), then the state field
    `;0120` when `states` are given, optionally `*HHHH`."""
    values = [int(v) for v in readings]
    if not values:
        raise ValueError("a frame needs at least one reading")
    if not all(INT32_MIN <= v <= INT32_MAX for v in values):
        raise ValueError("readings must fit in 32-bit signed integers")
    body = " ".join(map(str, values)).encode("ascii")
    if seq is not None:
        _check_seq(seq)
        body = b"@%d " % seq + body
    if states is not None:
        body += _state_field(states, len(values))
    return _finish(body, checksum)


def encode_frames(readings_2d: np.ndarray, first_seq: int | None = 0, checksum: bool = True,
                  states: np.ndarray | None = None) -> bytes:
    """Many frames at once; seq counts up from `first_seq` (wrapping at 65536), None for plain frames;
    `states` ((frames, channels), values 0..3) adds each frame's state field."""
    block = np.asarray(readings_2d, dtype=np.int64)
    if block.ndim != 2 or block.shape[1] == 0:
        raise ValueError("readings_2d must have shape (frames, channels) with at least one channel")
    n = block.shape[0]
    if n == 0:
        return b""
    if block.min() < INT32_MIN or block.max() > INT32_MAX:
        raise ValueError("readings must fit in 32-bit signed integers")
    fields = [block]
    if first_seq is not None:
        _check_seq(first_seq)
        fields.insert(0, ((first_seq + np.arange(n, dtype=np.int64)) % SEQ_MODULUS)[:, None])
    numbers = np.concatenate(fields, axis=1) if len(fields) > 1 else block
    text = _join_rows(numbers)
    if first_seq is not None:
        text = b"@" + text.replace(b"\n", b"\n@")[:-1]
    if states is not None:
        text = _with_states(text, block.shape, states)
    if not checksum:
        return text
    lines = text[:-1].split(b"\n")
    crc = binascii.crc_hqx
    out = b"".join([b"%s*%04X\n" % (line, crc(line, CRC_INIT)) for line in lines])
    if max(map(len, lines)) + 5 > MAX_LINE_BYTES:
        raise ValueError(f"frames of {block.shape[1]} channels are over the {MAX_LINE_BYTES}-byte line limit")
    return out


def _with_states(text: bytes, shape: tuple[int, int], states: np.ndarray) -> bytes:
    """Each line of `text` with its frame's state field before the line end."""
    digits = np.asarray(states)
    if digits.shape != shape or (digits.size and (digits.min() < 0 or digits.max() > 3)):
        raise ValueError(f"states must be {shape[0]} x {shape[1]} values from 0 to 3")
    fields = np.full((shape[0], shape[1] + 1), 0x3B, dtype=np.uint8)
    fields[:, 1:] = digits + 0x30
    lines = text[:-1].split(b"\n")
    return b"".join(line + field + b"\n" for line, field in zip(lines, map(bytes, fields), strict=True))


def _join_rows(numbers: np.ndarray) -> bytes:
    """Rows of integers as space-separated decimal lines, formatted in bulk (no per-number Python)."""
    width = 11  # "-2147483648"
    cells = numbers.astype(f"S{width}").view(np.uint8).reshape(numbers.shape[0], numbers.shape[1], width)
    sep = np.full((numbers.shape[0], numbers.shape[1], 1), 0x20, dtype=np.uint8)
    sep[:, -1, 0] = 0x0A
    flat = np.concatenate([cells, sep], axis=2).ravel()
    return flat[flat != 0].tobytes()


def _value_text(value: object) -> str:
    if isinstance(value, str):
        return value
    if isinstance(value, Iterable):
        return ",".join(str(v) for v in value)
    return str(value)


def encode_info(fields: Mapping[str, object], checksum: bool = True) -> bytes:
    """An info line `! key=value ...`; sequence values (names, polarity) are joined with commas."""
    parts = []
    for key, value in fields.items():
        text = _value_text(value)
        if not key or any(c.isspace() or c == "=" for c in key):
            raise ValueError(f"info key {key!r} must be non-empty without spaces or '='")
        if any(c.isspace() for c in text):
            raise ValueError(f"info value of {key} must not contain spaces: {text!r}")
        parts.append(f"{key}={text}")
    if not parts:
        raise ValueError("an info line needs at least one key=value")
    return _finish(("! " + " ".join(parts)).encode("ascii"), checksum)


def encode_note(text: str, checksum: bool = True) -> bytes:
    """A comment line `# text` (one line of ASCII)."""
    if "\n" in text or "\r" in text:
        raise ValueError("a note is one line: no CR or LF")
    body = ("# " + text).encode("ascii")
    if not checksum and split_checksum(body)[1] is not None:
        raise ValueError("an unchecksummed note must not end in '*' and four hex digits")
    return _finish(body, checksum)


def encode_answer(text: str, checksum: bool = True) -> bytes:
    """One answer line of section 7 (`>val ...`, `>ok ...`, `>no ...`: `protocol.commands` writes the
    text), as printable ASCII, optionally checksummed."""
    if not text.startswith(">") or not text.isascii() or not text.isprintable():
        raise ValueError(f"not a printable answer line: {text[:40]!r}")
    return _finish(text.encode("ascii"), checksum)
