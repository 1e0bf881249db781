"""Parsing padtune recordings (and raw captures of protocol lines) into events, marks and metadata.

The format is described in `processing.recording`; the names and types shared with the writer come from
`processing.recording_format`. A recording's text arrives in whole lines: `csv_events` takes the pieces
`processing.recording_read` cuts a file into, `parse_recording_text` a text held in memory. The data rows
between two stream rows (mark rows and blank lines among them give no event and do not cut the stretch:
detection gets large blocks) are converted in one numpy `loadtxt` call, seq and readings as integers when
they are written so, else as floats checked to be whole; a stretch it refuses is read row by row, which
names the damage. Raw captures go through `protocol.decoder.Decoder`, the live link's decoder, a chunk at a
time (`RawReader`, `parse_raw_capture`). Damaged text raises `UserError` as `file:line: what`; no Python
exception text reaches a message. Parsing is pure: no function here opens a file.
"""

from __future__ import annotations

import dataclasses
import math
import warnings
from collections.abc import Iterator
from urllib.parse import unquote

import numpy as np

from processing.recording_format import FORMAT_LINE, FORMAT_PREFIX, HEADER_START, MARK_KINDS, Mark, Recording
from protocol.errors import UserError
from protocol.events import (
    BoardChanged,
    BoardInfo,
    Event,
    FaultKind,
    FrameBlock,
    LinkFault,
    LinkState,
    LinkStatus,
    Note,
    StreamForm,
)
from protocol.info import MAX_CHANNELS
from protocol.rules import INT32_MAX, INT32_MIN

MAX_COUNT = 1 << 31  # a fault's count, a frame index: what a 32-bit board can count to and then some


def parse_pairs(body: str) -> tuple[dict[str, str], str]:
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
            raise ValueError(f"expected key=value, got {token[:40]!r}")
        pairs[key] = unquote(value)
    return pairs, text


def info_from_fields(fields: dict[str, str], t_s: float) -> BoardInfo:
    """A BoardInfo from an info line's raw fields, parsed by the protocol layer (PROTOCOL.md)."""
    from protocol.info import InfoError, parse_info

    try:
        return parse_info(dict(fields), t_s, cross_check=False)
    except InfoError as exc:
        raise ValueError(str(exc)) from None


def _need(pairs: dict[str, str], key: str, kind: str) -> str:
    if key not in pairs:
        raise ValueError(f"a {kind} row needs {key}=")
    return pairs[key]


def _whole(value: str, what: str, low: int, high: int) -> int:
    """A whole number from `low` to `high` (digits only: no Python limit or message reaches the user)."""
    digits = value[1:] if value[:1] in "+-" else value
    if not digits.isdigit() or not digits.isascii() or len(digits) > 12:
        raise ValueError(f"{what} must be a whole number, got {value[:40]!r}")
    number = int(value)
    if not low <= number <= high:
        raise ValueError(f"{what} must be from {low} to {high}, got {number}")
    return number


def _time(pairs: dict[str, str]) -> float:
    """A stream row's host time in seconds (NaN when the row has none, as before)."""
    value = pairs.get("t_s")
    if value is None:
        return math.nan
    try:
        t_s = float(value)
    except ValueError:
        raise ValueError(f"t_s must be a time in seconds, got {value[:40]!r}") from None
    if not math.isfinite(t_s):
        raise ValueError(f"t_s must be a finite time in seconds, got {value[:40]!r}")
    return t_s


def _choice(value: str, choices: type, what: str) -> object:
    known = [m.value for m in choices]  # type: ignore[attr-defined]
    if value not in known:
        raise ValueError(f"unknown {what} {value[:40]!r} (known: {', '.join(known)})")
    return choices(value)


Rows = tuple[np.ndarray, np.ndarray, np.ndarray]  # t_s (n,), seq (n,), readings (n, channels)


def check_rows(rows: list[str], width: int) -> Rows:
    """Data rows -> arrays in one numpy call; ValueError for any value that is not right (a time that is
    not finite, a seq or reading that is not a whole 32-bit number) or a row of another width."""
    whole = _whole_rows(rows, width)
    return whole if whole is not None else _float_rows(rows, width)


def _whole_rows(rows: list[str], width: int) -> Rows | None:
    """`check_rows` the quick way, for rows whose seq and readings are written as integers (as padtune
    writes them): one numpy call with the time parsed as a float (as before) and the rest as integers.
    None when anything is not so (a reading written `12.0` or `1e3`, another width, a value out of
    range): `_float_rows` then decides, and its answer is the same wherever this one gives one (numpy's
    integer parser takes a subset of what its float parser takes; a 32-bit integer is exact in a float64)."""
    row = np.dtype([("t_s", np.float64), ("ints", np.int64, (width + 1,))])
    try:
        with warnings.catch_warnings():  # numpy warns of lines it skips as empty: the float way decides
            warnings.simplefilter("error")
            arr = np.loadtxt(rows, delimiter=",", dtype=row, ndmin=1, comments=None)
    except (ValueError, UserWarning):
        return None
    t_s, ints = arr["t_s"], arr["ints"]
    if len(arr) != len(rows) or not np.all(np.isfinite(t_s)):
        return None
    if ints.size and (ints.min() < INT32_MIN or ints.max() > INT32_MAX):
        return None
    return t_s.copy(), ints[:, 0].copy(), np.ascontiguousarray(ints[:, 1:])  # contiguous, as before


def _float_rows(rows: list[str], width: int) -> Rows:
    """`check_rows` with every column parsed as a float (whole numbers checked)."""
    # numpy's C parser reads the whole stretch at once; readings are 32-bit integers, exact in float64,
    # and checked to be whole below.
    arr = np.loadtxt(rows, delimiter=",", dtype=np.float64, ndmin=2, comments=None)
    if arr.shape[1] != width + 2:
        raise ValueError("another number of columns")
    ints = arr[:, 1:]
    if not np.all(np.isfinite(arr[:, 0])) or np.any(ints != np.round(ints)):
        raise ValueError("not whole numbers")
    if ints.size and (ints.min() < INT32_MIN or ints.max() > INT32_MAX):
        raise ValueError("out of range")  # a board's readings and seq are 32-bit (PROTOCOL.md)
    return arr[:, 0].copy(), ints[:, 0].astype(np.int64), ints[:, 1:].astype(np.int64)


class Builder:
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

    def add_bulk(self, rows: Rows) -> None:
        """Rows converted in bulk (`check_rows` on a whole stretch), after any rows still held."""
        self.close_block()
        t_s, seq, readings = rows
        self._append(FrameBlock(t_s=t_s, seq=seq, readings=readings, first_index=self.next_index))

    def close_block(self) -> None:
        if not self.rows:
            return
        try:
            assert self.width is not None
            t_s, seq, readings = check_rows(self.rows, self.width)
        except ValueError:
            self._raise_for_bad_row()
        self.rows, self.linenos = [], []
        self._append(FrameBlock(t_s=t_s, seq=seq, readings=readings, first_index=self.next_index))

    def _append(self, block: FrameBlock) -> None:
        self.next_index += len(block)
        self.rec.events.append(block)

    def _raise_for_bad_row(self) -> None:
        for lineno, line in zip(self.linenos, self.rows, strict=True):
            cells = line.split(",")
            try:
                if not math.isfinite(float(cells[0])):
                    raise ValueError("time is not finite")
                if not all(len(c) <= 24 and INT32_MIN <= int(c) <= INT32_MAX for c in cells[1:]):
                    raise ValueError("out of range")
            except ValueError:
                raise UserError(
                    f"{self.where}:{lineno}: a data row must hold a time, a seq and 32-bit integer readings, "
                    f"got {','.join(cells)[:60]!r}"
                ) from None
        raise UserError(f"{self.where}: a data row could not be read")


def stream_row(b: Builder, kind: str, pairs: dict[str, str], text: str) -> None:
    rec = b.rec
    if kind not in ("info", "note", "fault", "link", "board-changed", "form", "index", "mark"):
        return  # unknown stream kinds come from a newer writer: skipped, the frames still read
    t_s = _time(pairs)
    if kind == "info":
        rec.events.append(info_from_fields({k: v for k, v in pairs.items() if k != "t_s"}, t_s))
    elif kind == "note":
        rec.events.append(Note(t_s, text.strip()))
    elif kind == "fault":
        fault = _choice(_need(pairs, "kind", kind), FaultKind, "fault kind")
        count = _whole(pairs.get("count", "1"), "a fault's count", 0, MAX_COUNT)
        rec.events.append(LinkFault(t_s, fault, count, text))  # type: ignore[arg-type]
    elif kind == "link":
        state = _choice(_need(pairs, "state", kind), LinkState, "link state")
        rec.events.append(LinkStatus(t_s, state, pairs.get("port", ""), text))  # type: ignore[arg-type]
    elif kind == "board-changed":
        old = pairs.get("old", "")
        channels = _whole(_need(pairs, "channels", kind), "channels", 1, MAX_CHANNELS)
        rec.events.append(BoardChanged(t_s, _whole(old, "old", 0, MAX_CHANNELS) if old else None, channels))
    elif kind == "form":
        names = pairs.get("names", "")
        name_list = tuple(names.split(",")) if names else ()
        if len(name_list) > MAX_CHANNELS:
            raise ValueError(f"a form row names {len(name_list)} channels; a board has at most "
                             f"{MAX_CHANNELS}")
        rec.events.append(StreamForm(t_s, _need(pairs, "form", kind), name_list,
                                     _whole(pairs.get("scale", "1"), "scale", 1, MAX_COUNT),
                                     pairs.get("time_column", "0") == "1", text))
    elif kind == "index":
        b.next_index = _whole(_need(pairs, "value", kind), "an index", 0, MAX_COUNT)
    elif kind == "mark":
        rec.marks.append(_mark(pairs, text, t_s))


def _mark(pairs: dict[str, str], text: str, t_s: float) -> Mark:
    mkind = pairs.get("kind", "note")
    if mkind not in MARK_KINDS:
        raise ValueError(f"unknown mark kind {mkind[:40]!r}")
    return Mark(t_s, mkind, pairs.get("channel"), text)


def _parse_line(b: Builder, lineno: int, line: str, in_meta: bool) -> bool:
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
                b.next_index = _whole(value, "first_index", 0, MAX_COUNT)
            return True
        if kind == "first_index" or body.startswith("first_index="):
            b.next_index = _whole(body.partition("=")[2], "first_index", 0, MAX_COUNT)
            return in_meta
        b.close_block()
        pairs, text = parse_pairs(rest)
        stream_row(b, kind, pairs, text)
        return in_meta
    if line.startswith(HEADER_START):
        b.close_block()
        columns = line.count(",") - 1
        if columns > MAX_CHANNELS:
            raise ValueError(f"the header names {columns} channels; a board has at most {MAX_CHANNELS} "
                             "(PROTOCOL.md)")
        rec.names = tuple(line.split(",")[2:])
        if not rec.names or not all(rec.names):
            raise ValueError(f"the header {line[:60]!r} must name every channel column after t_s,seq")
        b.width = len(rec.names)
        return False
    b.add_row(lineno, line)
    return False


def damaged(where: str, lineno: int, exc: Exception) -> UserError:
    return UserError(f"{where}:{lineno}: {exc}; the file is damaged or not a padtune recording")


class _CsvReader:
    """The text of a padtune recording, whole lines at a time, into events (`feed`), then `finish`."""

    def __init__(self, rec: Recording, where: str) -> None:
        self.rec = rec
        self.where = where
        self.b = Builder(rec, where)
        self.in_meta = True
        self.lineno = 1  # the number of the next line to read
        self.started = False

    def feed(self, text: str) -> None:
        """Whole lines (each ending in LF)."""
        if "\r" in text:  # CRLF line ends (a recording passed through another system)
            text = "\n".join(line.rstrip("\r") for line in text.split("\n"))
        lines = text.split("\n")
        lines.pop()  # the empty piece after the last LF
        first = 0
        if not self.started:
            self._format_line(lines[0] if lines else "")
            self.started, first = True, 1
        i, n = first, len(lines)
        b = self.b
        while i < n:
            if _is_data(lines[i]) and b.width is not None:
                j = self._stretch(lines, i, n)
                i = j
                continue
            line = lines[i].rstrip("\r")
            try:
                self.in_meta = _parse_line(b, self.lineno + i, line, self.in_meta)
            except (ValueError, KeyError, IndexError, OverflowError) as exc:
                raise damaged(self.where, self.lineno + i, exc) from None
            i += 1
        self.lineno += n
        self.b.close_block()

    def _stretch(self, lines: list[str], i: int, n: int) -> int:
        """Data rows from line i on, with the mark rows and blank lines among them (neither gives an
        event), as one block; returns the line after the stretch. Detection gets larger blocks (the
        writer puts a flush's marks after its rows), the frames and their order are the same."""
        rows: list[int] = []  # the data rows' line numbers in `lines`
        between: list[int] = []  # mark rows among them
        j = i
        starts = _DATA_START
        while j < n:
            line = lines[j]
            if line[:1] in starts:  # `_is_data` inline (the header's first character is not among them)
                rows.append(j)
            elif _is_mark_row(line):
                between.append(j)
            elif line.strip():
                break
            j += 1
        while j > i and not _is_data(lines[j - 1]):  # what follows the last data row is read as before
            j -= 1
            if between and between[-1] == j:
                between.pop()
        if len(rows) == j - i:  # data rows only
            self._data(lines, i, j)
            return j
        b = self.b
        assert b.width is not None
        try:
            bulk = check_rows([lines[k] for k in rows], b.width)
        except ValueError:
            self._in_order(lines, i, j)  # the first damage in file order is the one named
            return j
        b.add_bulk(bulk)
        for k in between:
            self._line(lines[k], k)
        return j

    def _in_order(self, lines: list[str], i: int, j: int) -> None:
        """Lines i..j-1 one stretch of data rows at a time, each other line on its own."""
        k = i
        while k < j:
            if _is_data(lines[k]):
                m = k + 1
                while m < j and _is_data(lines[m]):
                    m += 1
                self._data(lines, k, m)
                k = m
            else:
                self._line(lines[k], k)
                k += 1

    def _line(self, line: str, i: int) -> None:
        try:
            self.in_meta = _parse_line(self.b, self.lineno + i, line.rstrip("\r"), self.in_meta)
        except (ValueError, KeyError, IndexError, OverflowError) as exc:
            raise damaged(self.where, self.lineno + i, exc) from None

    def _data(self, lines: list[str], i: int, j: int) -> None:
        """Data rows i..j-1: in one numpy call, else row by row (which finds and names the damage)."""
        b = self.b
        assert b.width is not None
        try:
            rows = check_rows(lines[i:j], b.width)
        except ValueError:
            pass
        else:
            b.add_bulk(rows)
            return
        for k in range(i, j):
            try:
                b.add_row(self.lineno + k, lines[k])
            except ValueError as exc:
                raise damaged(self.where, self.lineno + k, exc) from None
        b.close_block()

    def _format_line(self, line: str) -> None:
        where = self.where
        if not line.startswith(FORMAT_PREFIX):
            raise UserError(f"{where}: not a padtune recording (first line must be {FORMAT_LINE!r})")
        version_text = line[len(FORMAT_PREFIX):].strip()
        if not version_text.isdigit() or len(version_text) > 6:
            raise UserError(f"{where}:1: cannot read the format version in {line[:60]!r}")
        version = int(version_text)
        if version != 1:
            raise UserError(f"{where}:1: recording format v{version} is newer than this padtune reads (v1)")
        self.rec.version = version

    def finish(self) -> None:
        if not self.started:
            raise UserError(f"{self.where}: not a padtune recording (first line must be {FORMAT_LINE!r})")


def _is_mark_row(line: str) -> bool:
    """A mark row as `_parse_line` reads one (a stream row of kind mark: no event, the mark is kept)."""
    return line.startswith("#") and line[1:].strip().partition(" ")[0] == "mark"


_DATA_START = frozenset("0123456789-+.")


def _is_data(line: str) -> bool:
    """A data row starts with its time (a digit, a sign or a point); anything else is read row by row."""
    return bool(line) and line[0] in _DATA_START and not line.startswith(HEADER_START)


def csv_events(rec: Recording, where: str, pieces: Iterator[tuple[bytes, int]]) -> Iterator[list[Event]]:
    """Whole-line byte pieces (with their offset in the file) of a recording -> the events of each."""
    reader = _CsvReader(rec, where)
    for piece, offset in pieces:
        try:
            text = piece.decode("utf-8")
        except UnicodeDecodeError as exc:
            raise UserError(f"{where}: not valid UTF-8 at byte {offset + exc.start}: the file is "
                            "damaged") from None
        reader.feed(text)
        events, rec.events = rec.events, []
        if events:
            yield events
    reader.finish()


def parse_recording_text(text: str, where: str = "<recording>") -> Recording:
    """Parse a padtune recording held in memory. Raises UserError `where:line: what is wrong` for a
    damaged file; a partial last line is dropped (`truncated`)."""
    data = text.encode("utf-8", "surrogateescape")
    cut = data.rfind(b"\n") + 1
    rec = Recording(path=where, version=None, truncated=cut < len(data))
    events: list[Event] = []
    for chunk in csv_events(rec, where, iter([(data[:cut], 0)] if cut else [])):
        events.extend(chunk)
    rec.events = events
    return rec


def parse_raw_capture(data: bytes, where: str = "<capture>", rate_hz: float | None = None) -> Recording:
    """A raw capture of protocol lines (v1, or a plain form) through the protocol's decoder.

    Times are made up: frame n arrives at n / rate (`rate_hz`, else the info line's rate, else 100 Hz);
    other events at the time of the frame that follows them. A partial last line is dropped.
    """
    rec = Recording(path=where, version=None, truncated=bool(data) and not data.endswith((b"\n", b"\r")))
    raw = RawReader(rec, rate_hz)
    rec.events = raw.feed(data) + raw.finish()
    if rec.frames == 0:
        raise UserError(no_frames_raw(where))
    return rec


def no_frames_raw(where: str) -> str:
    return f"{where}: no frames found: not a padtune recording nor a capture of protocol lines"


class RawReader:
    """Raw capture bytes through the live link's decoder, with made-up times (see `parse_raw_capture`)."""

    def __init__(self, rec: Recording, rate_hz: float | None) -> None:
        from protocol.decoder import Decoder  # the decoder owns the wire format

        self.rec = rec
        self.decoder = Decoder()
        self.rate_hz, self.rate = rate_hz, rate_hz
        self.frames = 0
        self.names: tuple[str, ...] = ()

    def feed(self, data: bytes) -> list[Event]:
        return self._timed(self.decoder.feed(data, 0.0))

    def finish(self) -> list[Event]:
        """The end of the capture lets go of lines held while a plain form is decided."""
        events = self._timed(self.decoder.flush_hold(0.0))
        info = self.decoder.info
        self.rec.names = info.names if info and info.names else self.names
        return events

    def _timed(self, decoded: list[Event]) -> list[Event]:
        out: list[Event] = []
        for event in decoded:
            t_s = self.frames / (self.rate or 100.0)
            if isinstance(event, FrameBlock):
                if event.channels > MAX_CHANNELS:
                    raise UserError(f"{self.rec.path}: frames of {event.channels} values; a board has at "
                                    f"most {MAX_CHANNELS} channels (PROTOCOL.md): not a capture of protocol "
                                    "lines")
                made_up_t_s = (self.frames + np.arange(len(event))) / (self.rate or 100.0)
                out.append(dataclasses.replace(event, t_s=made_up_t_s))
                self.frames += len(event)
                continue
            if isinstance(event, BoardInfo) and event.rate_hz and self.rate_hz is None:
                self.rate = event.rate_hz
            elif isinstance(event, StreamForm):
                self.names = event.names
            out.append(dataclasses.replace(event, t_s=t_s))
        return out
