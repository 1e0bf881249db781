"""`padtune tune` in bounded memory (issue 13): the compact frames (`processing.tune_frames`), one key's
delta trace at a time (`processing.stretches.KeyTrace`) and crosstalk by key
(`processing.crosstalk.couplings_by_key`) give what the whole-array path gives, in less memory.

References: the whole-array path itself, written out here as it stood before (every frame of every key
as one float64 array, `during_touches` on a frames x keys mask, `couplings` on the kept untouched
deltas), and `tracemalloc` (Python's standard library) for the peak of what numpy and Python allocate.
"""

from __future__ import annotations

import tracemalloc
from pathlib import Path

import numpy as np
import pytest

from processing.crosstalk import couplings, during_touches
from processing.recording import RecordingWriter, read_recording
from processing.recording_read import open_recording
from processing.stretches import find_touches
from processing.tune_frames import ChunkedReadings, read_frames
from processing.tuning import limits_from_result, tune_recording
from protocol.events import FrameBlock
from protocol.info import parse_info
from tui.headless.tuning import couplings_of, result_rows

RATE_HZ = 1000.0


def write_made_up(path: Path, channels: int, frames: int, marks: bool, polarity: str | None = "+",
                  seed: int = 3) -> None:
    """Noise, a 0.2 s touch every 0.5 s on one key after another (a neighbour moved by a tenth of it),
    with or without touch marks; a board that states its polarity, or not (then it is learned)."""
    rng = np.random.default_rng(seed)
    base = rng.integers(9000, 30000, size=channels)
    fields = {"proto": "1", "board": "made-up", "channels": str(channels), "rate": "1000",
              "names": ",".join(f"k{c:02d}" for c in range(channels))}
    if polarity:
        fields["polarity"] = polarity
    info = parse_info(fields, 0.0)
    now_s = [0.0]
    with RecordingWriter(path, origin_t_s=0.0, clock=lambda: now_s[0], source="test", info=info) as w:
        w.write_events([info])
        for start in range(0, frames, 1000):
            idx = np.arange(start, min(start + 1000, frames))
            r = base + rng.integers(-6, 7, size=(len(idx), channels))
            touched = (idx % 500 >= 100) & (idx % 500 < 300)
            key = (idx // 500) % channels
            r[touched, key[touched]] += 300
            r[touched, (key[touched] + 1) % channels] += 30
            w.write_events([FrameBlock(idx / RATE_HZ, idx % 65536, r.astype(np.int64), start)])
            if marks:
                for first in idx[idx % 500 == 100].tolist():
                    name = f"k{(first // 500) % channels:02d}"
                    w.mark(first / RATE_HZ, "touch-start", name, "")
                    w.mark((first + 200) / RATE_HZ, "touch-end", name, "")
            now_s[0] = idx[-1] / RATE_HZ
            w.maybe_flush()


def compact(path: Path, chunk_bytes: int = 1 << 22):
    with open_recording(path, chunk_bytes=chunk_bytes) as stream:
        return read_frames(stream)


def whole_array_couplings(result, readings: np.ndarray):
    """Crosstalk as it was computed before: every key's trace stacked, a frames x keys mask."""
    deltas = np.stack([k.trace.delta for k in result.keys], axis=1)
    touched = np.zeros(deltas.shape, bool)
    for c, k in enumerate(result.keys):
        for a, b in k.trace.stretches:
            touched[a:b, c] = True
    return couplings({c: k.trace.quiet for c, k in enumerate(result.keys)}, during_touches(deltas, touched),
                     {c: float(k.after.threshold_counts) for c, k in enumerate(result.keys)},
                     result.profile.sliders)


@pytest.mark.parametrize(("marks", "polarity"), [(True, "+"), (False, "+"), (False, None)])
def test_compact_frames_tune_exactly_as_the_whole_recording(tmp_path: Path, marks: bool,
                                                            polarity: str | None) -> None:
    path = tmp_path / "r.csv"
    write_made_up(path, channels=6, frames=12_000, marks=marks, polarity=polarity)
    rec = read_recording(path)
    frames = compact(path)
    t_s, _, readings = rec.arrays()
    assert frames.readings.shape == readings.shape and frames.rate_hz == rec.rate_hz
    assert np.array_equal(frames.t_s, t_s)
    assert all(np.array_equal(frames.readings[:, c], readings[:, c]) for c in range(readings.shape[1]))
    whole, small = tune_recording(rec), tune_recording(frames)
    assert small.profile == whole.profile and small.frames == whole.frames
    for a, b in zip(whole.keys, small.keys, strict=True):
        assert (a.figures, a.outcome, a.after, a.trace.stretches) == (b.figures, b.outcome, b.after,
                                                                      b.trace.stretches)
        assert np.array_equal(a.trace.delta, b.trace.delta) and np.array_equal(a.trace.quiet, b.trace.quiet)
        assert np.array_equal(a.trace.touched, b.trace.touched)
    assert any(k.trace.stretches for k in small.keys)  # touches were found (or marked) to compare
    found = couplings_of(small)
    assert found and found == whole_array_couplings(whole, readings)
    assert result_rows(small, found) == result_rows(whole, couplings_of(whole))
    assert limits_from_result(small, frames.readings) == limits_from_result(whole, readings)


def test_find_touches_takes_chunked_readings_as_an_array() -> None:
    rng = np.random.default_rng(9)
    r = 500 + rng.integers(-3, 4, size=(3000, 3))
    r[1000:1400, 1] += 80
    chunked = ChunkedReadings(3)
    for start in range(0, 3000, 700):  # pieces that do not divide the frames evenly
        chunked.append(r[start:start + 700])
    t_s = np.arange(3000) / 100.0
    a = find_touches(t_s, r, ("a", "b", "c"), (1,), 100.0)
    b = find_touches(t_s, chunked, ("a", "b", "c"), (1,), 100.0)
    assert [t.stretches for t in a] == [t.stretches for t in b] and a[1].stretches
    for x, y in zip(a, b, strict=True):
        assert np.array_equal(x.delta, y.delta) and np.array_equal(x.quiet, y.quiet)
    with pytest.raises(TypeError):
        chunked[5, 1]


def test_tune_peak_memory_stays_well_under_one_float_copy_of_the_frames(tmp_path: Path) -> None:
    """An 8 MB recording: reading, tuning, crosstalk and limits together allocate at their peak well under
    one float64 frames x keys array (the old path held several: the events' int64 blocks, their
    concatenation, every key's float trace, every key's untouched copy, their stack for crosstalk). What
    grows with the file is the int32 readings (half that array); the rest is one key's trace and one
    chunk of the file being converted (read here in 256 KiB chunks, so that fixed cost is small beside
    the frames: `tune` reads 4 MiB chunks, about 30 MB while one is converted, whatever the file's size)."""
    channels, frames = 64, 20_000
    path = tmp_path / "r.csv"
    write_made_up(path, channels=channels, frames=frames, marks=False)
    full_bytes = frames * channels * 8  # one float64 frames x keys array: 10.2 MB
    tracemalloc.start()
    try:
        rec = compact(path, chunk_bytes=1 << 18)
        result = tune_recording(rec)
        couplings_of(result)
        limits_from_result(result, rec.readings)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    touched = sum(bool(k.trace.stretches) for k in result.keys)
    assert result.frames == frames and touched >= 32  # 40 touches, one key after another: found, not marked
    assert rec.readings.nbytes == full_bytes // 2  # int32 readings: the one thing that grows with the file
    said = f"peak {peak / 1e6:.1f} MB for {full_bytes / 1e6:.1f} MB of float frames"
    assert peak < rec.readings.nbytes + 0.3 * full_bytes, said
    assert peak < 0.8 * full_bytes, said
