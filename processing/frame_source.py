"""Frames read a piece at a time, as many times as a computation needs: what streaming tuning goes through.

`padtune tune` must measure a recording of any length in bounded memory, so it never holds the frames:
each measure that needs the whole recording (a median, a percentile, the touches' runs) goes through it
again, a piece at a time. A `FrameSource` gives those passes: `pieces()` starts a fresh pass over every
frame of one width in order, cut into `Piece`s (the same cuts every pass). `ArraySource` serves frames
already in memory (tests, short captures); `processing.frame_spool.FrameSpool` serves a recording spooled
to a temporary file.

`DeltaPasses` is the same idea one step on: a callable that starts a fresh pass over every key's delta
(counts, touch positive), as (first frame, frames x keys float64) pieces.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Protocol

import numpy as np

# Frames in one piece: 8,192 x 64 keys x 8 bytes = 4 MiB of float deltas (32 MiB at the protocol's 512
# channels); large enough that numpy's per-call cost is small beside the work, small enough to stay in cache.
PIECE_FRAMES = 1 << 13


@dataclass(frozen=True, slots=True)
class Piece:
    """Frames [start, start + len(t_s)) of a source: host times (s) and readings (frames x keys, integers)."""

    start: int
    t_s: np.ndarray
    readings: np.ndarray

    def __len__(self) -> int:
        return len(self.t_s)

    @property
    def stop(self) -> int:
        return self.start + len(self.t_s)


class FrameSource(Protocol):
    """Every frame of one width, a pass at a time (see the module's docstring)."""

    @property
    def frames(self) -> int: ...

    @property
    def width(self) -> int: ...

    @property
    def t_first_s(self) -> float | None: ...

    @property
    def t_last_s(self) -> float | None: ...

    def pieces(self) -> Iterator[Piece]: ...

    def times_to_frames(self, times_s: np.ndarray) -> np.ndarray:
        """`np.searchsorted(t_s, times_s)` (side left) over the source's host times, as int64."""
        ...

    def rows(self, width: int) -> RowStore:
        """An empty store for rows of `width` float64 numbers computed from the frames (a baseline's
        points): kept where the frames are (memory for frames in memory, the spool's folder for a spool),
        so that what grows with the recording's length is never held by a source that does not hold it."""
        ...


class RowStore(Protocol):
    """Rows of float64 numbers appended in order and read back by index ranges."""

    width: int

    def __len__(self) -> int: ...

    def append(self, rows: np.ndarray) -> None: ...

    def read(self, start: int, stop: int) -> np.ndarray:
        """Rows [start, stop) (clipped to the rows there are), as a rows x width array."""
        ...


class MemoryRows:
    """A `RowStore` in memory."""

    def __init__(self, width: int) -> None:
        self.width = width
        self._parts: list[np.ndarray] = []
        self._whole = np.zeros((0, width), np.float64)

    def __len__(self) -> int:
        return len(self._whole) + sum(len(p) for p in self._parts)

    def append(self, rows: np.ndarray) -> None:
        rows = np.asarray(rows, np.float64).reshape(-1, self.width)
        if len(rows):
            self._parts.append(rows)

    def read(self, start: int, stop: int) -> np.ndarray:
        if self._parts:
            self._whole = np.concatenate([self._whole, *self._parts])
            self._parts = []
        return self._whole[max(0, start):max(0, stop)]


# (first frame, frames x keys float64 deltas): one piece of a pass over every key's delta
DeltaPiece = tuple[int, np.ndarray]
DeltaPasses = Callable[[], Iterator[DeltaPiece]]


class ArraySource:
    """Frames held in memory (`t_s`, `readings` frames x keys), served in pieces of `piece_frames`."""

    def __init__(self, t_s: np.ndarray, readings: np.ndarray, piece_frames: int = PIECE_FRAMES) -> None:
        readings = np.asarray(readings)
        if readings.ndim != 2 or len(readings) != len(t_s):
            raise ValueError(f"readings must be frames x keys with one row per time, not {readings.shape} "
                             f"for {len(t_s)} times")
        if piece_frames < 1:
            raise ValueError(f"a piece holds at least one frame, not {piece_frames}")
        self.t_s = np.asarray(t_s, np.float64)
        self.readings = readings
        self.piece_frames = piece_frames

    @property
    def frames(self) -> int:
        return len(self.t_s)

    @property
    def width(self) -> int:
        return int(self.readings.shape[1])

    @property
    def t_first_s(self) -> float | None:
        return float(self.t_s[0]) if len(self.t_s) else None

    @property
    def t_last_s(self) -> float | None:
        return float(self.t_s[-1]) if len(self.t_s) else None

    def pieces(self) -> Iterator[Piece]:
        for a in range(0, self.frames, self.piece_frames):
            b = a + self.piece_frames
            yield Piece(a, self.t_s[a:b], self.readings[a:b])

    def times_to_frames(self, times_s: np.ndarray) -> np.ndarray:
        return np.searchsorted(self.t_s, np.asarray(times_s, np.float64)).astype(np.int64)

    def rows(self, width: int) -> MemoryRows:
        return MemoryRows(width)
