"""The frames `tune` measures, read from a recording stream and held compactly.

`read_frames(stream)` takes a `RecordingStream`'s chunks one at a time and keeps only what tuning needs:
the host times (float64) and the readings as int32 (exact: the recording reader and the protocol refuse
readings outside 32 bits), one channel-major piece per chunk, of the last width only (as
`Recording.arrays()` does: every block of that width). The events themselves (int64 blocks, notes) are
let go as they are read, so the peak is the int32 readings, half of one int64 copy, not several full copies.

`TuneFrames` answers what `processing.tuning.tune_recording` asks of a `Recording` (`path`, `info`,
`channels`, `names`, `marks`, `rate_hz`, `truncated`, `arrays()`), with `readings` a `ChunkedReadings`:
`shape`, one channel's column (`readings[:, c]`, a fresh int32 array) and `pieces()` for code that goes
through the frames in order (the first-contact polarity learner).
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field

import numpy as np

from processing.recording_format import Mark
from processing.recording_read import RecordingStream
from protocol.events import BoardInfo, FrameBlock


class ChunkedReadings:
    """Frames x channels readings held as channel-major int32 pieces (each piece one chunk's frames)."""

    def __init__(self, width: int) -> None:
        self.width = width
        self._pieces: list[np.ndarray] = []  # each (width, frames), C-contiguous: a channel's row is one run
        self._frames = 0

    def append(self, readings: np.ndarray) -> None:
        if len(readings):
            self._pieces.append(np.ascontiguousarray(np.asarray(readings).T, np.int32))
            self._frames += len(readings)

    @property
    def shape(self) -> tuple[int, int]:
        return (self._frames, self.width)

    def __len__(self) -> int:
        return self._frames

    @property
    def nbytes(self) -> int:
        return sum(p.nbytes for p in self._pieces)

    def column(self, c: int) -> np.ndarray:
        """Channel `c`'s readings, every frame in order (a new int32 array)."""
        if not self._pieces:
            return np.zeros(0, np.int32)
        return np.concatenate([p[c] for p in self._pieces])

    def __getitem__(self, key: tuple[slice, int]) -> np.ndarray:
        rows, c = key
        if not (isinstance(rows, slice) and rows == slice(None)) or not isinstance(c, (int, np.integer)):
            raise TypeError("ChunkedReadings gives whole columns only: readings[:, channel]")
        return self.column(int(c))

    def pieces(self) -> Iterator[np.ndarray]:
        """The readings a chunk at a time, frames x channels (int32 views)."""
        for p in self._pieces:
            yield p.T


@dataclass
class TuneFrames:
    """A recording's frames for tuning (what `tune_recording` reads of a `Recording`)."""

    path: str
    names: tuple[str, ...]
    marks: list[Mark]
    truncated: bool
    info: BoardInfo | None
    t_s: np.ndarray
    readings: ChunkedReadings
    seq: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))

    @property
    def channels(self) -> int | None:
        if len(self.t_s) or self.readings.width:
            return self.readings.width
        return self.info.channels if self.info else None

    @property
    def rate_hz(self) -> float | None:
        """As `Recording.rate_hz`: the board's nominal rate, else the rate measured from the host times."""
        info = self.info
        if info and info.rate_hz:
            return info.rate_hz
        t_s = self.t_s
        if len(t_s) > 1 and t_s[-1] > t_s[0]:
            return float((len(t_s) - 1) / (t_s[-1] - t_s[0]))
        return None

    def arrays(self) -> tuple[np.ndarray, np.ndarray, ChunkedReadings]:
        return self.t_s, self.seq, self.readings


def read_frames(stream: RecordingStream) -> TuneFrames:
    """Every frame of `stream` (of the last width), read a chunk at a time; UserError as `chunks()` raises."""
    info: BoardInfo | None = None
    width: int | None = None
    held: dict[int, tuple[list[np.ndarray], ChunkedReadings]] = {}  # as `arrays()`: every block of a width
    for events in stream.chunks():
        for e in events:
            if isinstance(e, BoardInfo) and info is None:
                info = e
            elif isinstance(e, FrameBlock):
                width = e.channels
                times, readings = held.setdefault(width, ([], ChunkedReadings(width)))
                times.append(np.asarray(e.t_s, np.float64))
                readings.append(e.readings)
    times, readings = held.get(width, ([], ChunkedReadings(0))) if width is not None else \
        ([], ChunkedReadings(0))
    held.clear()  # the frames of other widths are not tuned
    t_s = np.concatenate(times) if times else np.zeros(0)
    marks = list(stream.marks) if stream.is_csv else []
    return TuneFrames(stream.path, stream.names, marks, stream.truncated, info, t_s, readings)
