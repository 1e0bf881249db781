"""Helpers for processing tests: build FrameBlocks straight from numpy arrays."""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np

from protocol.events import FrameBlock


def block(readings: np.ndarray, first_index: int = 0, rate_hz: float = 100.0) -> FrameBlock:
    readings = np.asarray(readings, np.int64)
    if readings.ndim == 1:
        readings = readings[:, None]
    n = readings.shape[0]
    t_s = (first_index + np.arange(n)) / rate_hz
    return FrameBlock(t_s, np.full(n, -1, np.int64), readings, first_index)


def blocks(readings: np.ndarray, sizes: list[int], rate_hz: float = 100.0) -> Iterator[FrameBlock]:
    """Split a (frames, channels) array into consecutive blocks of the given sizes (cycled)."""
    readings = np.asarray(readings, np.int64)
    pos, k = 0, 0
    while pos < len(readings):
        n = max(1, sizes[k % len(sizes)])
        yield block(readings[pos:pos + n], pos, rate_hz)
        pos, k = pos + n, k + 1


def cut_passes(full: np.ndarray, rng: np.random.Generator, most: int = 50):  # -> DeltaPasses
    """Passes over an in-memory frames x keys array, cut at random piece sizes from 1 frame to `most`
    (a fresh set of cuts every pass: a computation must not depend on them)."""
    full = np.asarray(full, np.float64)

    def one_pass() -> Iterator[tuple[int, np.ndarray]]:
        at = 0
        while at < len(full):
            n = 1 if rng.random() < 0.2 else int(rng.integers(1, most + 1))
            yield at, full[at:at + n]
            at += n

    return one_pass
