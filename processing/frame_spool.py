"""A recording's frames spooled to an unnamed temporary file: a `FrameSource` that never holds them.

`spool_frames(stream)` goes once through a `RecordingStream`'s chunks and writes every frame as it comes:
host times (float64) to one temporary file, readings (int32, exact: the recording reader and the
protocol refuse readings outside 32 bits, and a guard here says so if a block ever holds one) to
another. Both are `tempfile.TemporaryFile`s, unlinked from the start, so nothing is left in the folder
even if the process is killed. What is kept is what `Recording.arrays()` gives of the whole file: the
first BoardInfo, every block of the LAST width seen (in order), the marks of a padtune recording,
`names`, `truncated`, `path`.

`FrameSpool.pieces()` reads the frames back a piece at a time (regular pieces of `piece_frames`,
whatever the decoder's block sizes), as many passes as a computation needs; `times_to_frames` counts
the frames before each time a piece at a time (times in order), else is numpy's own `searchsorted` over
a memory map of the final width's times (made contiguous after the decoding pass
when blocks of several widths were interleaved). Memory: one decoder chunk plus one piece.

A folder that cannot be written (full, read-only, missing) is a `UserError` naming it and why.
"""

from __future__ import annotations

import errno
import os
import tempfile
from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import BinaryIO

import numpy as np

from processing.frame_source import PIECE_FRAMES, Piece
from processing.recording_format import Mark
from processing.recording_read import RecordingStream
from protocol.errors import UserError
from protocol.events import BoardInfo, FrameBlock
from protocol.rules import INT32_MAX, INT32_MIN

TIME_BYTES = 8  # one float64 host time
READING_BYTES = 4  # one int32 reading
# Causes that more room would cure (the hint then says where to find room).
_NO_ROOM = {errno.ENOSPC, errno.EDQUOT, errno.EFBIG}


@dataclass
class _Runs:
    """One width's frames in the spool files: runs of (first frame's byte offset in the times file, in
    the readings file, frames). A run grows while its blocks follow each other in both files, so a
    recording of one width is one run."""

    width: int
    runs: list[tuple[int, int, int]] = field(default_factory=list)
    frames: int = 0
    t_first_s: float | None = None
    t_last_s: float | None = None

    def add(self, times_at: int, readings_at: int, t_s: np.ndarray) -> None:
        n = len(t_s)
        if self.runs:
            t0, r0, m = self.runs[-1]
            if t0 + m * TIME_BYTES == times_at and r0 + m * self.width * READING_BYTES == readings_at:
                self.runs[-1] = (t0, r0, m + n)
                n = 0
        if n:
            self.runs.append((times_at, readings_at, n))
        if self.t_first_s is None:
            self.t_first_s = float(t_s[0])
        self.frames += len(t_s)
        self.t_last_s = float(t_s[-1])

    def starts(self) -> np.ndarray:
        """Each run's first frame among this width's frames."""
        return np.cumsum([0] + [m for _, _, m in self.runs[:-1]], dtype=np.int64)


class FrameSpool:
    """A recording's frames of one width on disk (see the module's docstring); a `FrameSource`."""

    def __init__(self, path: str, names: tuple[str, ...], marks: list[Mark], truncated: bool,
                 info: BoardInfo | None, spool: _SpoolFiles, runs: _Runs, piece_frames: int) -> None:
        self.path = path
        self.names = names
        self.marks = marks
        self.truncated = truncated
        self.info = info
        self.piece_frames = piece_frames
        self._spool = spool
        self._runs = runs
        self._starts = runs.starts()
        self._times_at = spool.contiguous_times(runs, piece_frames)  # byte offset of the final times
        self._times_map: np.memmap | None = None

    def __enter__(self) -> FrameSpool:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        """Let go of the spool (the files were never named: the space is freed as they close)."""
        self._times_map = None
        self._spool.close()

    @property
    def frames(self) -> int:
        return self._runs.frames

    @property
    def width(self) -> int:
        return self._runs.width

    @property
    def t_first_s(self) -> float | None:
        return self._runs.t_first_s

    @property
    def t_last_s(self) -> float | None:
        return self._runs.t_last_s

    @property
    def channels(self) -> int | None:
        """As `Recording.channels`: the frames' width, else the board's channels."""
        if self.frames or self.width:
            return self.width
        return self.info.channels if self.info else None

    @property
    def rate_hz(self) -> float | None:
        """As `Recording.rate_hz`: the board's nominal rate, else the rate measured from the host times."""
        info = self.info
        if info and info.rate_hz:
            return info.rate_hz
        first, last = self.t_first_s, self.t_last_s
        if self.frames > 1 and first is not None and last is not None and last > first:
            return float((self.frames - 1) / (last - first))
        return None

    def step_rate_hz(self) -> float | None:
        """The frame rate frame to frame: 1 / the median of each piece's median time step (one pass over
        the times; None without two frames or steps). Beside `rate_hz` over the whole recording, it tells a
        clock that jumped (or stood still) from a board's real rate."""
        medians = []
        for a in range(0, self.frames, self.piece_frames):
            t_s = self._times(a, min(a + self.piece_frames, self.frames))
            if len(t_s) > 1:
                medians.append(float(np.median(np.diff(t_s))))
        step = float(np.median(medians)) if medians else 0.0
        return 1.0 / step if step > 0 and np.isfinite(step) else None

    def pieces(self) -> Iterator[Piece]:
        """A fresh pass over every frame, in regular pieces (fresh, writable arrays: int32 readings)."""
        for a in range(0, self.frames, self.piece_frames):
            b = min(a + self.piece_frames, self.frames)
            yield Piece(a, self._times(a, b), self._readings(a, b))

    def times_to_frames(self, times_s: np.ndarray) -> np.ndarray:
        """`np.searchsorted(t_s, times_s)` (side left) over the frames' host times, as int64.

        Host times in order (the usual case) are counted a piece at a time: the frames before a time are
        the sum of each piece's; nothing is mapped or held. Times out of order (a clock stepped back) are
        searched by numpy itself over a memory map of them, so the answer is still numpy's."""
        times_s = np.asarray(times_s, np.float64)
        if not self.frames:
            return np.searchsorted(np.zeros(0), times_s).astype(np.int64)
        counts = np.zeros(times_s.shape, np.int64)
        last = -np.inf
        for a in range(0, self.frames, self.piece_frames):
            t_s = self._times(a, min(a + self.piece_frames, self.frames))
            if t_s[0] < last or (len(t_s) > 1 and bool(np.any(t_s[1:] < t_s[:-1]))) or np.isnan(t_s).any():
                return self._searched_in_place(times_s)
            counts += np.searchsorted(t_s, times_s)
            last = float(t_s[-1])
        return counts

    def _searched_in_place(self, times_s: np.ndarray) -> np.ndarray:
        if self._times_map is None:
            self._times_map = np.memmap(self._spool.times, dtype=np.float64, mode="r",
                                        offset=self._times_at, shape=(self.frames,))
        return np.searchsorted(self._times_map, times_s).astype(np.int64)

    def rows(self, width: int) -> SpooledRows:
        """A `RowStore` in an unnamed file of its own beside the frames (closed with the spool)."""
        return SpooledRows(self._spool, width)

    def _times(self, a: int, b: int) -> np.ndarray:
        out = np.empty(b - a, np.float64)
        self._spool.read_into(self._spool.times, out, self._times_at + a * TIME_BYTES)
        return out

    def _readings(self, a: int, b: int) -> np.ndarray:
        """Frames [a, b) gathered from the runs that hold them."""
        width = self.width
        out = np.empty((b - a, width), np.int32)
        i = int(np.searchsorted(self._starts, a, side="right")) - 1
        at = a
        while at < b:
            start = int(self._starts[i])
            _, readings_at, n = self._runs.runs[i]
            stop = min(b, start + n)
            self._spool.read_into(self._spool.readings, out[at - a:stop - a],
                                  readings_at + (at - start) * width * READING_BYTES)
            at, i = stop, i + 1
        return out


class SpooledRows:
    """A `RowStore` (`processing.frame_source`) on disk: float64 rows appended to an unnamed file."""

    def __init__(self, spool: _SpoolFiles, width: int) -> None:
        self.width = width
        self._spool = spool
        self._file = spool.extra()
        self._rows = 0

    def __len__(self) -> int:
        return self._rows

    def append(self, rows: np.ndarray) -> None:
        rows = np.asarray(rows, np.float64).reshape(-1, self.width)
        if len(rows):
            self._spool._write(self._file, rows)
            self._rows += len(rows)

    def read(self, start: int, stop: int) -> np.ndarray:
        start, stop = max(0, start), min(stop, self._rows)
        out = np.empty((max(0, stop - start), self.width), np.float64)
        if len(out):
            self._spool.read_into(self._file, out, start * self.width * 8)
        return out


class _SpoolFiles:
    """The two unnamed temporary files (times, readings), written at their ends, read by offset."""

    def __init__(self, spool_dir: str | None) -> None:
        # The hint names what the user can change: TMPDIR when the folder is the system's temporary one.
        self.change = "set TMPDIR to" if spool_dir is None else "spool to"
        self.folder = spool_dir
        self.times: BinaryIO | None = None
        self.readings: BinaryIO | None = None
        self.times_end = 0
        self.readings_end = 0
        self.extras: list[BinaryIO] = []
        try:
            self.folder = spool_dir if spool_dir is not None else tempfile.gettempdir()
            # Unbuffered: a write that fails fails here, never later in a close that flushes.
            # Held open for the spool's life, closed by `close` (a `with` would close them here).
            self.times = tempfile.TemporaryFile(dir=self.folder, buffering=0)  # noqa: SIM115
            self.readings = tempfile.TemporaryFile(dir=self.folder, buffering=0)  # noqa: SIM115
        except OSError as exc:
            self.close()
            raise self.failed(exc) from None

    def extra(self) -> BinaryIO:
        """One more unnamed file in the folder (rows computed from the frames), closed with the rest."""
        try:
            file = tempfile.TemporaryFile(dir=self.folder, buffering=0)  # noqa: SIM115 (closed by close)
        except OSError as exc:
            raise self.failed(exc) from None
        self.extras.append(file)
        return file

    def failed(self, exc: OSError) -> UserError:
        """The one line for a spool that cannot be written (or read back)."""
        folder = self.folder if self.folder is not None else os.environ.get("TMPDIR", "the temporary folder")
        reason = exc.strerror or os.strerror(exc.errno or errno.EIO)
        wanted = "a folder with room" if exc.errno in _NO_ROOM else "a folder padtune can write"
        return UserError(f"cannot spool the recording's frames to {folder}: {reason} "
                         f"({self.change} {wanted})")

    def append(self, t_s: np.ndarray, readings: np.ndarray) -> tuple[int, int]:
        """Write one block's times and readings at the files' ends; their byte offsets."""
        assert self.times is not None and self.readings is not None
        at = (self.times_end, self.readings_end)
        self.times_end += self._write(self.times, t_s)
        self.readings_end += self._write(self.readings, readings)
        return at

    def _write(self, file: BinaryIO, values: np.ndarray) -> int:
        data = memoryview(np.ascontiguousarray(values)).cast("B")
        done = 0
        try:
            while done < len(data):
                # A short write means the disk filled up; the next write says so (ENOSPC).
                n = file.write(data[done:])
                if not n:
                    raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
                done += n
        except OSError as exc:
            raise self.failed(exc) from None
        return done

    def read_into(self, file: BinaryIO | None, out: np.ndarray, offset: int) -> None:
        """Fill `out` (C-contiguous) from `file` at byte `offset`."""
        assert file is not None
        view = memoryview(out).cast("B")
        done = 0
        try:
            while done < len(view):
                n = os.preadv(file.fileno(), [view[done:]], offset + done)
                if n == 0:
                    raise OSError(errno.EIO, "the spool file ends early")
                done += n
        except OSError as exc:
            raise self.failed(exc) from None

    def contiguous_times(self, runs: _Runs, piece_frames: int) -> int:
        """The byte offset of the final width's times as one region: where they are when they form one
        run, else copied (a piece at a time) to the end of the times file."""
        if len(runs.runs) <= 1:
            return runs.runs[0][0] if runs.runs else 0
        at = self.times_end
        for times_at, _, n in runs.runs:
            for k in range(0, n, piece_frames):
                part = np.empty(min(piece_frames, n - k), np.float64)
                self.read_into(self.times, part, times_at + k * TIME_BYTES)
                assert self.times is not None
                self.times_end += self._write(self.times, part)
        return at

    def close(self) -> None:
        for file in (self.times, self.readings, *self.extras):
            if file is not None:
                file.close()


def _int32(block: FrameBlock, where: str) -> np.ndarray:
    """A block's readings as int32, or UserError if one is outside 32 bits (the reader refuses those)."""
    readings = np.asarray(block.readings)
    if readings.size and (readings.min() < INT32_MIN or readings.max() > INT32_MAX):
        bad = readings[(readings < INT32_MIN) | (readings > INT32_MAX)][0]
        raise UserError(f"{where}: a reading outside 32 bits ({int(bad)}): the file is damaged or not a "
                        "padtune recording")
    return readings.astype(np.int32)


def spool_frames(stream: RecordingStream, spool_dir: str | None = None,
                 piece_frames: int = PIECE_FRAMES) -> FrameSpool:
    """Every frame of `stream` (of the last width) spooled to disk in one pass; UserError as `chunks()`
    raises, or for a spool folder that cannot be written."""
    if piece_frames < 1:
        raise ValueError(f"a piece holds at least one frame, not {piece_frames}")
    spool = _SpoolFiles(spool_dir)
    try:
        info: BoardInfo | None = None
        width: int | None = None
        held: dict[int, _Runs] = {}  # as `Recording.arrays()`: every block of a width
        for events in stream.chunks():
            for e in events:
                if isinstance(e, BoardInfo) and info is None:
                    info = e
                elif isinstance(e, FrameBlock) and len(e):
                    width = e.channels
                    t_s = np.asarray(e.t_s, np.float64)
                    times_at, readings_at = spool.append(t_s, _int32(e, stream.path))
                    held.setdefault(width, _Runs(width)).add(times_at, readings_at, t_s)
                elif isinstance(e, FrameBlock):
                    width = e.channels  # an empty block still says the width (as `Recording.arrays()`)
        runs = held.get(width, _Runs(width)) if width is not None else _Runs(0)
        marks = list(stream.marks) if stream.is_csv else []
        return FrameSpool(stream.path, stream.names, marks, stream.truncated, info, spool, runs, piece_frames)
    except BaseException:
        spool.close()
        raise
