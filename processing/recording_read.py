"""Reading padtune recordings (and raw captures of protocol lines) from files back into events, marks and
metadata, in bounded memory.

The parsing is `processing.recording_parse`'s (pure); this module owns the file. Files are read in chunks
of whole lines (`CHUNK_BYTES`), so memory stays bounded whatever the file's size: `open_recording(path)`
gives a `RecordingStream` (its marks found at once by a first pass over the file) whose `chunks()` yields
the events each chunk completed (what `replay` feeds detection as it goes); `read_recording(path)`
collects them all into a `Recording` (what `tune` measures). Only regular files are read: a folder, a
device or a FIFO is refused. Damaged files raise `UserError` as `file:line: what`; no Python exception
text reaches a message. `open_recording` is the only function here that opens a file.
"""

from __future__ import annotations

import os
import re
import stat
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import BinaryIO

from processing.recording_format import FORMAT_PREFIX, Mark, Recording
from processing.recording_parse import (
    Builder,
    RawReader,
    csv_events,
    damaged,
    no_frames_raw,
    parse_pairs,
    stream_row,
)
from protocol.errors import UserError
from protocol.events import Event, FrameBlock
from protocol.tomlfile import special_kind

CHUNK_BYTES = 1 << 22  # whole lines read and converted at a time (4 MiB: about 10,000 rows of 64 channels)
RAW_CHUNK_BYTES = 1 << 20  # bytes of a raw capture handed to the decoder at a time
MAX_LINE_BYTES = 1 << 20  # a recording's longest line (a 512-channel header of long names is far shorter)
MAX_HELD_EVENTS = 10_000  # events before the first frame held back (see RecordingStream.chunks)
# A mark row as `recording_parse._parse_line` reads one: "#", blanks, "mark", then a space or the line end.
_MARK_ROW = re.compile(rb"#[ \t\x0b\x0c]*mark(?:[ \r][^\n]*)?$")
BOM = b"\xef\xbb\xbf"  # a UTF-8 byte order mark some editors put first; skipped


class RecordingStream:
    """An open recording or raw capture, read a chunk at a time (`chunks()`), in bounded memory.

    Known at once: `path`, `version` (None for a raw capture), `truncated` (the last line is partial and
    is dropped), `marks` (a padtune recording's marks, found by a first pass that keeps only them, so
    every touch can be judged against them as it is found). `meta` and `names` fill in as chunks are
    read. Use as a context manager, or `close()`.
    """

    def __init__(self, file: BinaryIO, where: str, size_bytes: int, rate_hz: float | None = None,
                 chunk_bytes: int = CHUNK_BYTES) -> None:
        self._file = file
        self.where = where
        self.chunk_bytes = chunk_bytes
        head = file.read(len(BOM) + len(FORMAT_PREFIX))
        self._skip = len(BOM) if head.startswith(BOM) else 0
        self.is_csv = head[self._skip:].startswith(FORMAT_PREFIX.encode())
        last = b""
        if size_bytes:
            file.seek(size_bytes - 1)
            last = file.read(1)
        ends = (b"\n",) if self.is_csv else (b"\n", b"\r")
        self.rec = Recording(path=where, version=None, truncated=bool(size_bytes) and last not in ends)
        self.rate_hz = rate_hz
        self.marks: list[Mark] = self._find_marks() if self.is_csv else []
        self.frames = 0

    @property
    def path(self) -> str:
        return self.where

    @property
    def truncated(self) -> bool:
        return self.rec.truncated

    @property
    def meta(self) -> dict[str, str]:
        return self.rec.meta

    @property
    def names(self) -> tuple[str, ...]:
        return self.rec.names

    def __enter__(self) -> RecordingStream:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        self._file.close()

    def _pieces(self) -> Iterator[tuple[bytes, int]]:
        """The file in pieces of whole lines (LF), each with its byte offset; the partial last line is
        not given. A line longer than MAX_LINE_BYTES is refused (memory stays bounded)."""
        f = self._file
        f.seek(self._skip)
        carry, offset = b"", self._skip
        while True:
            data = f.read(self.chunk_bytes)
            if not data:
                return
            buf = carry + data if carry else data
            cut = buf.rfind(b"\n") + 1
            if cut:
                yield buf[:cut], offset
                offset += cut
            carry = buf[cut:]
            if len(carry) > MAX_LINE_BYTES:
                raise UserError(f"{self.where}:{self._line_at(offset)}: a line longer than {MAX_LINE_BYTES} "
                                "bytes: the file is damaged or not a padtune recording")

    def _line_at(self, offset: int) -> int:
        """The number of the line that starts at byte `offset` (counted only for a message: the file is
        read again up to there)."""
        f, lineno = self._file, 1
        at = f.tell()
        f.seek(self._skip)
        left = offset - self._skip
        while left > 0:
            data = f.read(min(left, self.chunk_bytes))
            if not data:
                break
            lineno += data.count(b"\n")
            left -= len(data)
        f.seek(at)
        return lineno

    def _find_marks(self) -> list[Mark]:
        """Every mark row, read on their own (a first pass over the file that converts nothing else:
        `bytes.find` skips the data rows, which never hold the word)."""
        rec = Recording(path=self.where, version=None)
        b = Builder(rec, self.where)
        for piece, offset in self._pieces():
            pos = piece.find(b"mark")
            while pos >= 0:
                start = piece.rfind(b"\n", 0, pos) + 1
                end = piece.find(b"\n", pos)
                found = _MARK_ROW.match(piece, start, end)
                if found is not None:
                    self._mark_row(b, found.group(0), offset + start)
                pos = piece.find(b"mark", end)
        return rec.marks

    def _mark_row(self, b: Builder, line: bytes, offset: int) -> None:
        """One mark row (starting at byte `offset`, which gives its line number in a message)."""
        body = line.decode("utf-8", "replace").rstrip("\r")[1:].strip()
        try:
            pairs, text = parse_pairs(body.partition(" ")[2])
            stream_row(b, "mark", pairs, text)
        except (ValueError, KeyError, IndexError, OverflowError) as exc:
            raise damaged(self.where, self._line_at(offset), exc) from None

    def chunks(self) -> Iterator[list[Event]]:
        """The events in stream order, a chunk's worth at a time. Raises UserError for damage where it
        is found, and at the end for a recording without a single frame (one cut inside its header)."""
        source = csv_events(self.rec, self.where, self._pieces()) if self.is_csv else self._raw_chunks()
        held: list[Event] = []
        for events in source:
            self.frames += sum(len(e) for e in events if isinstance(e, FrameBlock))
            if not self.frames:
                # Nothing is given before the first frame (up to a bound): a file without one is refused
                # before a front end has said anything about it.
                held.extend(events)
                if len(held) < MAX_HELD_EVENTS:
                    continue
            if held:
                events, held = held + events, []
            yield events
        if self.frames == 0:
            raise UserError(self._no_frames())

    def _no_frames(self) -> str:
        if not self.is_csv:
            return no_frames_raw(self.where)
        if not self.rec.names:
            return (f"{self.where}: the recording ends before its header row (cut short while it was "
                    "written?): no frames to read")
        return f"{self.where}: the recording holds no frames (a header row and no data rows)"

    def _raw_chunks(self) -> Iterator[list[Event]]:
        raw = RawReader(self.rec, self.rate_hz)
        f = self._file
        f.seek(0)
        while True:
            data = f.read(RAW_CHUNK_BYTES)
            if not data:
                break
            events = raw.feed(data)
            if events:
                yield events
        events = raw.finish()
        if events:
            yield events

    def read_all(self) -> Recording:
        """The whole recording in memory (what `tune` measures)."""
        events: list[Event] = []
        for chunk in self.chunks():
            events.extend(chunk)
        rec = self.rec
        rec.events = events
        if self.is_csv:
            rec.marks = list(self.marks)
        return rec


def open_recording(path: str | os.PathLike[str], rate_hz: float | None = None,
                   chunk_bytes: int = CHUNK_BYTES) -> RecordingStream:
    """Open a padtune recording or a raw capture for reading in chunks (UserError for anything that is not
    a readable regular file: a folder, a device such as /dev/zero, a FIFO that may never end)."""
    p = Path(path)
    try:
        # O_NONBLOCK: opening a FIFO must not wait for a writer; it is refused below.
        fd = os.open(p, os.O_RDONLY | os.O_NONBLOCK | getattr(os, "O_CLOEXEC", 0))
    except FileNotFoundError:
        raise UserError(f"{p}: no such file") from None
    except IsADirectoryError:
        raise UserError(f"{p}: is a folder, not a recording") from None
    except OSError as exc:
        raise UserError(f"{p}: cannot read: {exc.strerror}") from None
    try:
        st = os.fstat(fd)
        if stat.S_ISDIR(st.st_mode):
            raise UserError(f"{p}: is a folder, not a recording")
        if not stat.S_ISREG(st.st_mode):
            # A device or a pipe (/dev/zero, a FIFO) may never end: a recording is a file on disk.
            kind = special_kind(st.st_mode)
            raise UserError(f"{p}: is {kind}, not a regular file; record the board to a file first "
                            "(padtune record)")
        os.set_blocking(fd, True)
        file = os.fdopen(fd, "rb", buffering=0)
    except BaseException:
        os.close(fd)
        raise
    try:
        return RecordingStream(file, str(p), st.st_size, rate_hz, chunk_bytes)
    except OSError as exc:
        file.close()
        raise UserError(f"{p}: cannot read: {exc.strerror}") from None
    except BaseException:
        file.close()
        raise


def read_recording(path: str | os.PathLike[str], rate_hz: float | None = None) -> Recording:
    """Read a padtune recording or a raw capture of protocol lines (UserError for anything unreadable,
    or without a single frame)."""
    with open_recording(path, rate_hz) as stream:
        return _reading(stream.where, stream.read_all)


def _reading(where: str, read: Callable[[], Recording]) -> Recording:
    try:
        return read()
    except OSError as exc:
        raise UserError(f"{where}: cannot read: {exc.strerror}") from None
