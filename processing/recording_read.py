"""Reading padtune recordings (and raw captures of protocol lines) back into events, marks and metadata.

The format is described in `processing.recording`; the names and types shared with the writer come from
`processing.recording_format`. Parsing is pure; `read_recording` is the only function here that touches
the file system. Damaged files raise `UserError` as `file:line: what`.
"""

from __future__ import annotations

import dataclasses
import math
import os
from pathlib import Path
from urllib.parse import unquote

import numpy as np

from processing.recording_format import FORMAT_LINE, FORMAT_PREFIX, HEADER_START, MARK_KINDS, Mark, Recording
from protocol.errors import UserError
from protocol.events import (
    BoardChanged,
    BoardInfo,
    FaultKind,
    FrameBlock,
    LinkFault,
    LinkState,
    LinkStatus,
    Note,
    StreamForm,
)
from protocol.rules import INT32_MAX, INT32_MIN


def _parse_pairs(body: str) -> tuple[dict[str, str], str]:
    """`k=v k=v text=...` -> (pairs, text)."""
    text = ""
    if body.startswith("text="):
        body, text = "", body[5:]
    elif " text=" in body:
        body, text = body.split(" text=", 1)
    pairs: dict[str, str] = {}
    for token in body.split():
        key, sep, value = token.partition("=")
        if not sep:
            raise ValueError(f"expected key=value, got {token!r}")
        pairs[key] = unquote(value)
    return pairs, text


def info_from_fields(fields: dict[str, str], t_s: float) -> BoardInfo:
    """A BoardInfo from an info line's raw fields, parsed by the protocol layer (PROTOCOL.md)."""
    from protocol.info import InfoError, parse_info

    try:
        return parse_info(dict(fields), t_s, cross_check=False)
    except InfoError as exc:
        raise ValueError(str(exc)) from None


class _Builder:
    """Collects data rows into FrameBlocks between stream rows."""

    def __init__(self, rec: Recording, where: str) -> None:
        self.rec = rec
        self.where = where
        self.rows: list[str] = []
        self.linenos: list[int] = []
        self.width: int | None = None
        self.next_index = 0

    def add_row(self, lineno: int, line: str) -> None:
        if self.width is None:
            raise ValueError("a data row before the header row")
        if line.count(",") != self.width + 1:
            raise ValueError(f"expected {self.width + 2} columns, got {line.count(',') + 1}")
        self.rows.append(line)
        self.linenos.append(lineno)

    def close_block(self) -> None:
        if not self.rows:
            return
        try:
            # numpy's C parser reads the whole stretch at once; readings are 32-bit integers, exact
            # in float64, and checked to be whole below.
            arr = np.loadtxt(self.rows, delimiter=",", dtype=np.float64, ndmin=2, comments=None)
            ints = arr[:, 1:]
            if not np.all(np.isfinite(arr[:, 0])) or np.any(ints != np.round(ints)):
                raise ValueError("not whole numbers")
            if ints.size and (ints.min() < INT32_MIN or ints.max() > INT32_MAX):
                raise ValueError("out of range")  # a board's readings and seq are 32-bit (PROTOCOL.md)
        except ValueError:
            self._raise_for_bad_row()
        block = FrameBlock(t_s=arr[:, 0].copy(), seq=ints[:, 0].astype(np.int64),
                           readings=ints[:, 1:].astype(np.int64), first_index=self.next_index)
        self.rows, self.linenos = [], []
        self.next_index += len(block)
        self.rec.events.append(block)

    def _raise_for_bad_row(self) -> None:
        for lineno, line in zip(self.linenos, self.rows, strict=True):
            cells = line.split(",")
            try:
                if not math.isfinite(float(cells[0])):
                    raise ValueError("time is not finite")
                if not all(INT32_MIN <= int(c) <= INT32_MAX for c in cells[1:]):
                    raise ValueError("out of range")
            except ValueError:
                raise UserError(
                    f"{self.where}:{lineno}: a data row must hold a time, a seq and 32-bit integer readings, "
                    f"got {','.join(cells)[:60]!r}"
                ) from None
        raise UserError(f"{self.where}: a data row could not be read")


def _stream_row(b: _Builder, kind: str, pairs: dict[str, str], text: str) -> None:
    rec = b.rec
    t_s = float(pairs.get("t_s", "nan"))
    if kind == "info":
        rec.events.append(info_from_fields({k: v for k, v in pairs.items() if k != "t_s"}, t_s))
    elif kind == "note":
        rec.events.append(Note(t_s, text.strip()))
    elif kind == "fault":
        rec.events.append(LinkFault(t_s, FaultKind(pairs["kind"]), int(pairs.get("count", 1)), text))
    elif kind == "link":
        rec.events.append(LinkStatus(t_s, LinkState(pairs["state"]), pairs.get("port", ""), text))
    elif kind == "board-changed":
        old = pairs.get("old", "")
        rec.events.append(BoardChanged(t_s, int(old) if old else None, int(pairs["channels"])))
    elif kind == "form":
        names = pairs.get("names", "")
        rec.events.append(StreamForm(t_s, pairs["form"], tuple(names.split(",")) if names else (),
                                     int(pairs.get("scale", 1)), pairs.get("time_column", "0") == "1", text))
    elif kind == "index":
        b.next_index = int(pairs["value"])
    elif kind == "mark":
        mkind = pairs.get("kind", "note")
        if mkind not in MARK_KINDS:
            raise ValueError(f"unknown mark kind {mkind!r}")
        rec.marks.append(Mark(t_s, mkind, pairs.get("channel"), text))
    # Unknown stream kinds come from a newer writer: skipped, the frames still read.


def parse_recording_text(text: str, where: str = "<recording>") -> Recording:
    """Parse a padtune recording. Raises UserError `where:line: what is wrong` for a damaged file."""
    lines = text.split("\n")
    truncated = bool(lines) and lines[-1] != ""
    lines = lines[:-1]  # the last piece is empty for a whole file, or a partial row to drop
    if not lines or not lines[0].startswith(FORMAT_PREFIX):
        raise UserError(f"{where}: not a padtune recording (first line must be {FORMAT_LINE!r})")
    try:
        version = int(lines[0][len(FORMAT_PREFIX):].strip())
    except ValueError:
        raise UserError(f"{where}:1: cannot read the format version in {lines[0]!r}") from None
    if version != 1:
        raise UserError(f"{where}:1: recording format v{version} is newer than this padtune reads (v1)")
    rec = Recording(path=where, version=version, truncated=truncated)
    b = _Builder(rec, where)
    in_meta = True
    for lineno, raw in enumerate(lines[1:], start=2):
        line = raw.rstrip("\r")
        try:
            in_meta = _parse_line(b, lineno, line, in_meta)
        except (ValueError, KeyError) as exc:
            raise UserError(
                f"{where}:{lineno}: {exc}; the file is damaged or not a padtune recording"
            ) from None
    try:
        b.close_block()
    except ValueError as exc:
        raise UserError(f"{where}: {exc}") from None
    return rec


def _parse_line(b: _Builder, lineno: int, line: str, in_meta: bool) -> bool:
    rec = b.rec
    if not line.strip():
        return in_meta
    if line.startswith("#"):
        body = line[1:].strip()
        kind, _, rest = body.partition(" ")
        if in_meta and "=" in kind and " " not in body:
            key, _, value = body.partition("=")
            rec.meta[key] = unquote(value)
            if key == "first_index":
                b.next_index = int(value)
            return True
        if kind == "first_index" or body.startswith("first_index="):
            b.next_index = int(body.partition("=")[2])
            return in_meta
        b.close_block()
        pairs, text = _parse_pairs(rest)
        _stream_row(b, kind, pairs, text)
        return in_meta
    if line.startswith(HEADER_START):
        b.close_block()
        rec.names = tuple(line.split(",")[2:])
        if not rec.names or not all(rec.names):
            raise ValueError(f"the header {line[:60]!r} must name every channel column after t_s,seq")
        b.width = len(rec.names)
        return False
    b.add_row(lineno, line)
    return False


def parse_raw_capture(data: bytes, where: str = "<capture>", rate_hz: float | None = None) -> Recording:
    """A raw capture of protocol lines (v1, or a plain form) through the protocol's decoder.

    Times are made up: frame n arrives at n / rate (`rate_hz`, else the info line's rate, else 100 Hz);
    other events at the time of the frame that follows them. A partial last line is dropped.
    """
    from protocol.decoder import Decoder  # the decoder owns the wire format

    decoder = Decoder()
    rec = Recording(path=where, version=None, truncated=bool(data) and not data.endswith((b"\n", b"\r")))
    # The end of the capture lets go of lines held while a plain form is decided.
    decoded = decoder.feed(data, 0.0) + decoder.flush_hold(0.0)
    rate, frames = rate_hz, 0
    names: tuple[str, ...] = ()
    for event in decoded:
        t_s = frames / (rate or 100.0)
        if isinstance(event, FrameBlock):
            made_up_t_s = (frames + np.arange(len(event))) / (rate or 100.0)
            rec.events.append(dataclasses.replace(event, t_s=made_up_t_s))
            frames += len(event)
            continue
        if isinstance(event, BoardInfo) and event.rate_hz and rate_hz is None:
            rate = event.rate_hz
        elif isinstance(event, StreamForm):
            names = event.names
        rec.events.append(dataclasses.replace(event, t_s=t_s))
    rec.names = decoder.info.names if decoder.info and decoder.info.names else names
    if rec.frames == 0:
        raise UserError(f"{where}: no frames found: not a padtune recording nor a capture of protocol lines")
    return rec


def read_recording(path: str | os.PathLike[str], rate_hz: float | None = None) -> Recording:
    """Read a padtune recording or a raw capture of protocol lines (UserError for anything unreadable)."""
    p = Path(path)
    if p.exists() and not p.is_dir() and not p.is_file():
        # A device or a pipe (/dev/zero, a FIFO) may never end: a recording is a file on disk.
        raise UserError(f"{p}: not a regular file; record the board to a file first (padtune record)")
    try:
        data = p.read_bytes()
    except FileNotFoundError:
        raise UserError(f"{p}: no such file") from None
    except IsADirectoryError:
        raise UserError(f"{p}: is a folder, not a recording") from None
    except OSError as exc:
        raise UserError(f"{p}: cannot read: {exc.strerror}") from None
    if data.startswith(FORMAT_PREFIX.encode()):
        try:
            text = data.decode("utf-8")
        except UnicodeDecodeError as exc:
            raise UserError(f"{p}: not valid UTF-8 at byte {exc.start}: the file is damaged") from None
        return parse_recording_text(text, str(p))
    return parse_raw_capture(data, str(p), rate_hz)
