"""Streaming baselines and deltas (processing.baseline_stream) against the whole-array implementation
(tests/processing/tune_reference.py: `key_delta`, the plain reference it must equal bit for bit)
and against numpy's own median and interpolation on a hand-made case."""

from __future__ import annotations

import numpy as np
import pytest

import processing.baseline_stream as baseline_stream
from processing.baseline_stream import baselines, window_frames
from processing.frame_source import ArraySource
from tests.processing.tune_reference import key_delta


def _readings(rng: np.random.Generator, frames: int, width: int) -> np.ndarray:
    drift = np.cumsum(rng.normal(0, 0.3, (frames, width)), axis=0)
    touch = np.zeros((frames, width))
    for c in range(width):
        for _ in range(3):
            a = int(rng.integers(0, frames))
            touch[a:a + int(rng.integers(5, 200)), c] = rng.choice([-1, 1]) * rng.integers(20, 300)
    return np.rint(10_000 + drift + touch + rng.normal(0, 2, (frames, width))).astype(np.int32)


@pytest.mark.parametrize("seed", range(12))
def test_deltas_equal_the_whole_array_ones(seed: int, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(baseline_stream, "ROWS_AT_ONCE", 1 + seed % 4)  # the rolling minimum in blocks
    rng = np.random.default_rng(seed)
    frames, width = int(rng.integers(1, 3000)), int(rng.integers(1, 5))
    rate_hz = float(rng.choice([20.0, 50.0, 100.0, 333.0, 1000.0]))
    readings = _readings(rng, frames, width)
    sign = rng.choice([-1, 1], width).astype(np.int64)
    t_s = np.arange(frames) / rate_hz
    want = np.empty((frames, width))
    for c in range(width):
        want[:, c] = key_delta(readings, c, int(sign[c]), rate_hz)
    for piece_frames in (1, 3, int(rng.integers(2, 500)), 4096):
        b = baselines(ArraySource(t_s, readings, piece_frames), sign, rate_hz)
        got = np.concatenate([d for _, d in b.passes()])
        assert np.array_equal(got, want), piece_frames  # bit for bit, whatever the cuts


def test_a_hand_made_baseline() -> None:
    # 4 windows of 2 frames at 4 Hz (window 0.5 s): medians 1.5, 10, 3.5, 5.5 (numpy.median of each pair);
    # the span covers all four, so every point is the lowest, 1.5; deltas are readings - 1.5.
    readings = np.array([[1], [2], [10], [10], [3], [4], [5], [6]], np.int32)
    assert window_frames(4.0) == 2
    b = baselines(ArraySource(np.arange(8) / 4.0, readings, 3), np.array([1]), 4.0)
    assert b.low.read(0, 4)[:, 0].tolist() == [1.5] * 4
    assert np.concatenate([d for _, d in b.passes()])[:, 0].tolist() == (readings[:, 0] - 1.5).tolist()


def test_a_zero_delta_is_never_negative_zero() -> None:
    # A falling key (sign -1) reading 0 under a baseline of 0 gives -0.0 - 0.0 = -0.0 in IEEE 754; the
    # deltas are +0.0 so that medians of zeros do not depend on numpy's partition order.
    readings = np.zeros((40, 1), np.int32)
    b = baselines(ArraySource(np.arange(40) / 10.0, readings, 7), np.array([-1]), 10.0)
    got = np.concatenate([d for _, d in b.passes()])[:, 0]
    assert not np.signbit(got).any() and (got == 0).all()


def test_points_kept_on_disk_beside_a_spool_read_back_as_written(tmp_path) -> None:
    # A spool's row store (an unnamed file) gives back exactly the rows a memory store gives.
    from processing.frame_source import MemoryRows
    from processing.frame_spool import SpooledRows, _SpoolFiles

    files = _SpoolFiles(str(tmp_path))
    try:
        disk, memory = SpooledRows(files, 3), MemoryRows(3)
        rng = np.random.default_rng(5)
        for n in (0, 1, 7, 100):
            rows = rng.normal(size=(n, 3))
            disk.append(rows)
            memory.append(rows)
        assert len(disk) == len(memory) == 108
        for a, b in ((0, 108), (5, 9), (100, 200), (-3, 2), (50, 50)):
            assert np.array_equal(disk.read(a, b), memory.read(a, b))
    finally:
        files.close()


@pytest.mark.parametrize("seed", range(20))
def test_interpolating_every_key_at_once_is_numpys_interp_bit_for_bit(seed: int) -> None:
    # numpy.interp, one column at a time, is the reference; the frames fall before, on, between and after
    # the points, and the points' values are half-integers (medians of counts) or arbitrary floats.
    from processing.baseline_stream import interpolate

    rng = np.random.default_rng(seed)
    n = int(rng.integers(2, 40))
    xp = np.cumsum(rng.integers(1, 50, n)).astype(np.float64) + rng.choice([0.0, 0.5])
    fp = rng.normal(0, 1e4, (n, 3)) if seed % 2 else np.rint(rng.normal(0, 1e4, (n, 3)) * 2) / 2
    x = np.concatenate([np.arange(xp[0] - 5, xp[-1] + 5), xp]).astype(np.float64)
    got = interpolate(x, xp, fp)
    for k in range(3):
        want = np.interp(x, xp, fp[:, k])
        assert np.array_equal(got[:, k], want) and not (np.signbit(got[:, k]) ^ np.signbit(want)).any()
