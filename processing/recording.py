"""The padtune recording format (CSV with commented metadata), its writer and its readers.

A recording is a text file, one line per row, LF endings:

    # padtune recording v1
    # start_utc=2026-12-01T22:17:24.123456Z
    # source=sim://greenhouse?speed=4
    # first_index=0
    # info t_s=0.000120 proto=1 board=greenhouse channels=6 rate=100 names=zone1,zone2,...
    t_s,seq,zone1,zone2,...
    0.010250,0,10231,10410,...
    # mark t_s=2.500000 kind=touch-start channel=zone1 text=hold zone 1
    ...

- The first line names the format and its version. Metadata rows (`# key=value`) follow until the first
  header row. Unknown metadata keys are kept, never an error.
- The header row is `t_s,seq,` and one column per channel, named after the board's names: its info line's,
  else those of its plain form (`# form` row), and `chN` for a channel whose name is missing, unusable
  (`protocol.info.name_problem`) or repeated. Data rows: host time in seconds since the recording's origin
  (6 decimals), the frame's sequence number (-1 when it had none), then the integer readings. A plain
  form's board time is not kept.
- Stream rows (`# <kind> key=value ... [text=free text to the end of the line]`) keep what happened between
  frames, in stream order, so a replay feeds detection exactly what the live run saw:
  `info` (an info line, its fields verbatim), `form` (how a board without v1 frames prints: form, scale,
  time_column 0/1, names; PROTOCOL.md section 6), `note` (a board comment or text line),
  `fault` (a link fault: kind, count),
  `link` (connection state), `board-changed` (followed by a new header row), `index` (the next frame's
  running index when frames were skipped), and `mark` (a user mark, see `Mark`).
  Values are percent-encoded where they hold whitespace or `%`; `text=` always comes last and takes the
  rest of the line as it is.
- The writer only ever writes whole rows and hands them to the operating system at least every
  `flush_interval_s` (0.25 s by default) while it is called, so `kill -9` loses at most that much and the
  file stays readable; the reader drops a partial last line (a crash mid-write) and says so.

A file that does not start with the format line is read as a raw capture of protocol v1 lines and fed
through `protocol.decoder.Decoder`, with times made up from the frame count and the board's rate.
This module owns the format and writes it; `processing.recording_format` holds the names and types the
writer and the reader share, `processing.recording_parse` parses and `processing.recording_read` reads
files. No Textual import, no threads, no ports: the front ends write through a writer thread of their own
(`tui.recorder`).
"""

from __future__ import annotations

import datetime as _dt
import os
import string
import time
from collections.abc import Callable, Iterable
from pathlib import Path
from urllib.parse import quote

# The format's shared names and the reader are part of this module's API too (`read_recording` and
# `Mark` are usually imported from here); the reader (`recording_read` over `recording_parse`) imports
# only `recording_format` of the format's modules, so no cycle.
from processing.atomic import NotRegularFile, open_regular, refuse_non_regular
from processing.recording_format import FORMAT_LINE, FORMAT_PREFIX, HEADER_START, MARK_KINDS, Mark, Recording
from processing.recording_parse import info_from_fields, parse_raw_capture, parse_recording_text
from processing.recording_read import read_recording
from protocol.errors import UserError
from protocol.events import (
    Answer,
    BoardChanged,
    BoardInfo,
    Event,
    FrameBlock,
    LinkFault,
    LinkStatus,
    Note,
    StreamForm,
)
from protocol.info import name_problem

__all__ = ["FORMAT_LINE", "FORMAT_PREFIX", "HEADER_START", "MARK_KINDS", "Mark", "Recording",
           "RecordingWriter", "format_event", "format_frames", "format_header", "format_mark",
           "format_stream_row", "header_names", "info_from_fields", "parse_raw_capture",
           "parse_recording_text", "read_recording", "utc_stamp"]

_SAFE = "".join(c for c in string.punctuation if c != "%")


# ---------------------------------------------------------------- formatting (pure)


def _enc(value: object) -> str:
    return quote(str(value), safe=_SAFE)


def format_stream_row(kind: str, pairs: Iterable[tuple[str, object]], text: str | None = None) -> str:
    """One `# kind k=v ... text=...` row, LF included. Newlines in `text` become spaces."""
    parts = [f"# {kind}"] + [f"{k}={_enc(v)}" for k, v in pairs]
    if text:
        parts.append("text=" + text.replace("\r", " ").replace("\n", " "))
    return " ".join(parts) + "\n"


def format_header(names: Iterable[str]) -> str:
    return ",".join([HEADER_START, *(n.replace(",", "_") for n in names)]) + "\n"


def format_frames(block: FrameBlock, origin_t_s: float) -> str:
    """Data rows for a block of frames (times relative to `origin_t_s`)."""
    t_col = block.t_s - origin_t_s
    rows = [
        f"{t:.6f},{s}," + ",".join(map(str, r))
        for t, s, r in zip(t_col.tolist(), block.seq.tolist(), block.readings.tolist(), strict=True)
    ]
    return "\n".join(rows) + "\n" if rows else ""


def format_event(event: Event, origin_t_s: float) -> str:
    """Stream row(s) for any non-frame event."""
    t = f"{event.t_s - origin_t_s:.6f}"
    if isinstance(event, BoardInfo):
        return format_stream_row("info", [("t_s", t), *event.fields.items()])
    if isinstance(event, Note):
        return format_stream_row("note", [("t_s", t)], event.text or " ")
    if isinstance(event, LinkFault):
        return format_stream_row(
            "fault", [("t_s", t), ("kind", event.kind.value), ("count", event.count)], event.detail
        )
    if isinstance(event, LinkStatus):
        return format_stream_row(
            "link", [("t_s", t), ("state", event.state.value), ("port", event.port)], event.detail
        )
    if isinstance(event, BoardChanged):
        old = "" if event.old_channels is None else event.old_channels
        return format_stream_row("board-changed", [("t_s", t), ("old", old), ("channels", event.channels)])
    if isinstance(event, StreamForm):
        pairs: list[tuple[str, object]] = [("t_s", t), ("form", event.form), ("scale", event.scale),
                                           ("time_column", int(event.time_column))]
        if event.names:
            pairs.append(("names", ",".join(event.names)))
        return format_stream_row("form", pairs, event.detail)
    raise TypeError(f"not an event: {event!r}")


def header_names(names: tuple[str, ...], channels: int) -> tuple[str, ...]:
    """Column names for `channels` readings: the board's where usable and unique, else `chN`."""
    if len(names) != channels:
        return tuple(f"ch{i}" for i in range(channels))
    out = [n if name_problem(n) is None and names.index(n) == i else f"ch{i}" for i, n in enumerate(names)]
    if len(set(out)) != channels:  # a board name such as "ch1" met a fallback
        return tuple(f"ch{i}" for i in range(channels))
    return tuple(out)


def format_mark(mark: Mark, origin_t_s: float = 0.0) -> str:
    pairs: list[tuple[str, object]] = [("t_s", f"{mark.t_s - origin_t_s:.6f}"), ("kind", mark.kind)]
    if mark.channel is not None:
        pairs.append(("channel", mark.channel))
    return format_stream_row("mark", pairs, mark.text)


def utc_stamp(epoch_s: float) -> str:
    stamp = _dt.datetime.fromtimestamp(epoch_s, tz=_dt.UTC)
    return stamp.strftime("%Y-%m-%dT%H:%M:%S.%fZ")


# ---------------------------------------------------------------- writer (thin shell)


def check_recording_target(path: str | os.PathLike[str], overwrite: bool = False) -> None:
    """The checks `RecordingWriter` makes when it opens, made before a port is opened (UserError, one
    line): a folder, a device, FIFO or socket, an existing file without `overwrite`, a symlink loop.
    The writer checks again as it opens (the name may change in between)."""
    target = Path(path)
    if target.is_dir():
        raise UserError(f"{target} is a folder: give the recording's file name (such as run.csv)")
    try:
        refuse_non_regular(target)
        os.stat(target)
    except NotRegularFile as exc:
        raise UserError(f"{target}: {exc.strerror} for the recording") from None
    except FileNotFoundError:
        return
    except OSError as exc:
        raise UserError(f"cannot create recording {target}: {exc.strerror}") from None
    if not overwrite:
        raise UserError(f"{target} already exists: choose another file name, or overwrite it "
                        "(--force on the command line)")


class RecordingWriter:
    """Writes events to a recording file as they come; whole rows only, flushed every `flush_interval_s`.

    It writes on the caller's thread: front ends use `tui.recorder.Recorder`, which runs one of these on
    a writer thread of its own.

    `origin_t_s` is the event clock's value that becomes time 0 (default: `clock()` now). Call
    `write_events` with every batch the link hands over (frames, info, faults ...), `mark` for user marks,
    `maybe_flush` from a timer when no events come, and `close` at the end. Pass the board's latest
    `info` when recording starts mid-session, so names and polarity are in the file. `overwrite=False`
    refuses an existing file (UserError) so a recording is never lost by a slip of the keyboard.
    """

    def __init__(
        self,
        path: str | os.PathLike[str],
        *,
        source: str = "",
        origin_t_s: float | None = None,
        clock: Callable[[], float] = time.monotonic,
        wall_clock: Callable[[], float] = time.time,
        flush_interval_s: float = 0.25,
        overwrite: bool = False,
        meta: dict[str, object] | None = None,
        info: BoardInfo | None = None,
    ) -> None:
        self.path = Path(path)
        self._clock = clock
        self.origin_t_s = clock() if origin_t_s is None else origin_t_s
        self.flush_interval_s = flush_interval_s
        self.frames_written = 0
        self.marks_written = 0
        self._names: tuple[str, ...] = ()
        self._names_from_info = False  # an info line's names win over a plain form's
        self._width: int | None = None
        self._header_written = False
        self._next_index: int | None = None
        self._buffer: list[str] = []
        self._last_flush_s = clock()
        flags = os.O_WRONLY | os.O_CREAT | (os.O_TRUNC if overwrite else os.O_EXCL)
        if self.path.is_dir():
            raise UserError(f"{self.path} is a folder: give the recording's file name (such as run.csv)")
        try:
            self._fd: int | None = open_regular(self.path, flags, 0o644)
        except NotRegularFile as exc:  # a device, FIFO or socket at the name: never written into
            raise UserError(f"{self.path}: {exc.strerror} for the recording") from None
        except FileExistsError:
            raise UserError(
                f"{self.path} already exists: choose another file name, or overwrite it "
                "(--force on the command line)"
            ) from None
        except OSError as exc:
            raise UserError(f"cannot create recording {self.path}: {exc.strerror}") from None
        # start_utc is the wall time of the origin (t_s = 0), which may lie before this call.
        start_epoch_s = wall_clock() - (clock() - self.origin_t_s)
        head = [FORMAT_LINE + "\n", f"# start_utc={utc_stamp(start_epoch_s)}\n"]
        if source:
            head.append(f"# source={_enc(source)}\n")
        for key, value in (meta or {}).items():
            head.append(f"# {key}={_enc(value)}\n")
        self._buffer.extend(head)
        if info is not None:  # recording started mid-session: the board's info still belongs in it
            self.write_events([info])
        self.flush()

    @property
    def closed(self) -> bool:
        return self._fd is None

    def write_events(self, events: Iterable[Event]) -> None:
        if self._fd is None:  # closed, or abandoned after a write error: nothing may pile up in memory
            return
        for event in events:
            if isinstance(event, FrameBlock):
                self._write_block(event)
            elif isinstance(event, Answer):
                continue  # command traffic (PROTOCOL.md section 7), not the board's measurements
            else:
                if isinstance(event, BoardInfo) and event.names and not self._header_written:
                    self._names, self._names_from_info = event.names, True
                elif isinstance(event, StreamForm) and event.names and not self._header_written \
                        and not self._names_from_info:
                    self._names = event.names
                if isinstance(event, BoardChanged):
                    self._header_written = False
                    self._names, self._names_from_info = (), False
                self._buffer.append(format_event(event, self.origin_t_s))
        self.maybe_flush()

    def _write_block(self, block: FrameBlock) -> None:
        if len(block) == 0:
            return
        if self._next_index is None:
            self._buffer.append(f"# first_index={block.first_index}\n")
        elif block.first_index != self._next_index:
            self._buffer.append(format_stream_row("index", [("value", block.first_index)]))
        if not self._header_written or block.channels != self._width:
            self._buffer.append(format_header(header_names(self._names, block.channels)))
            self._header_written, self._width = True, block.channels
        self._buffer.append(format_frames(block, self.origin_t_s))
        self._next_index = block.first_index + len(block)
        self.frames_written += len(block)

    def mark(self, t_s: float, kind: str = "note", channel: str | None = None, text: str = "") -> Mark:
        """Write a mark at event-clock time `t_s`; returns the mark with its recording-relative time."""
        if kind not in MARK_KINDS:
            raise UserError(f"unknown mark kind {kind!r}: use one of {', '.join(MARK_KINDS)}")
        mark = Mark(t_s - self.origin_t_s, kind, channel, text)
        self._buffer.append(format_mark(mark))
        self.marks_written += 1
        self.maybe_flush()
        return mark

    def maybe_flush(self) -> None:
        if self._buffer and self._clock() - self._last_flush_s >= self.flush_interval_s:
            self.flush()

    def flush(self) -> None:
        """Hand every buffered whole row to the operating system (one write per call where it can)."""
        if self._fd is None:
            return
        data = "".join(self._buffer).encode("utf-8")
        self._buffer.clear()
        try:
            self._write_all(data)
        except OSError as exc:
            # A full disk or a vanished drive: stop writing, keep what reached the file, and say so in
            # one line (the reader drops a partial last row, so the file stays readable).
            os.close(self._fd)
            self._fd = None
            raise UserError(
                f"writing the recording {self.path} failed ({exc.strerror}); the rows written before "
                "this point are kept"
            ) from None
        self._last_flush_s = self._clock()

    def _write_all(self, data: bytes) -> None:
        """Every byte of `data` to the file (a short write is continued); OSError as the OS says."""
        assert self._fd is not None
        view = memoryview(data)
        while view:
            written = os.write(self._fd, view)
            view = view[written:]

    def close(self) -> None:
        if self._fd is None:
            return
        try:
            self.flush()  # on a failed write this closes the file itself and raises UserError
            os.fsync(self._fd)
        except OSError as exc:
            raise UserError(f"writing the recording {self.path} failed ({exc.strerror}); the rows "
                            "written before this point are kept") from None
        finally:
            if self._fd is not None:
                os.close(self._fd)
                self._fd = None

    def __enter__(self) -> RecordingWriter:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
