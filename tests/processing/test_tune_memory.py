"""`padtune tune` in bounded memory (issue 13): a recording spooled to disk (`processing.frame_spool`) and
tuned by passes (`processing.tuning`) gives what tuning it in memory gives, and the peak does not grow
with the recording's length.

References: the same recording read whole by the plain reader (`read_recording`, every event in memory)
and tuned from that; the whole-array tuning it replaced is the reference of tests/processing/
test_tune_stream.py. `tracemalloc` (Python's standard library) measures the peak of what numpy and Python
allocate.
"""

from __future__ import annotations

import tracemalloc
from pathlib import Path

import numpy as np
import pytest

from processing.frame_spool import spool_frames
from processing.recording import RecordingWriter, read_recording
from processing.recording_read import open_recording
from processing.tuning import limits_from_result, tune_recording
from protocol.events import FrameBlock
from protocol.info import parse_info
from tui.headless.tuning import result_rows

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


def spooled(path: Path, folder: Path, chunk_bytes: int = 1 << 22, piece_frames: int | None = None):
    kw = {} if piece_frames is None else {"piece_frames": piece_frames}
    with open_recording(path, chunk_bytes=chunk_bytes) as stream:
        return spool_frames(stream, str(folder), **kw)


@pytest.mark.parametrize(("marks", "polarity"), [(True, "+"), (False, "+"), (False, None)])
def test_a_spooled_recording_tunes_exactly_as_the_whole_recording(tmp_path: Path, marks: bool,
                                                                  polarity: str | None) -> None:
    path = tmp_path / "r.csv"
    write_made_up(path, channels=6, frames=12_000, marks=marks, polarity=polarity)
    whole = tune_recording(read_recording(path))
    with spooled(path, tmp_path, chunk_bytes=1 << 16, piece_frames=997) as spool:
        small = tune_recording(spool, budget_values=5_000)
        assert small.profile == whole.profile and small.frames == whole.frames == 12_000
        assert [k.trace for k in small.keys] == [k.trace for k in whole.keys]
        assert any(k.trace.stretches for k in small.keys)  # touches were found (or marked) to compare
        assert small.couplings and small.couplings == whole.couplings
        assert result_rows(small) == result_rows(whole)
        assert limits_from_result(small) == limits_from_result(whole)


def _tune_peak(path: Path, folder: Path) -> tuple[int, int]:
    tracemalloc.start()
    try:
        with spooled(path, folder, chunk_bytes=1 << 18, piece_frames=4096) as spool:
            result = tune_recording(spool, budget_values=200_000)
            limits_from_result(result)
            touched = sum(bool(k.trace.stretches) for k in result.keys)
            assert touched == spool.width  # one key after another: each found, not marked
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    return peak, result.frames


def test_tune_memory_does_not_grow_with_the_recording(tmp_path: Path) -> None:
    """16 keys, 40,000 and 120,000 frames: the peak is a chunk of the file being converted, two pieces of
    frames and their deltas (one being made while the last is let go: pieces of 4,096 frames here, so both
    recordings span many), the selections' budget (200,000 values here; `tune` allows 4 Mi) and a few
    numbers per touch and per half second: the same for three times the frames. One float64 copy of the
    longer recording's frames would be 15.4 MB."""
    short, long = tmp_path / "short.csv", tmp_path / "long.csv"
    write_made_up(short, channels=16, frames=40_000, marks=False)
    write_made_up(long, channels=16, frames=120_000, marks=False)
    peak_short, n_short = _tune_peak(short, tmp_path)
    peak_long, n_long = _tune_peak(long, tmp_path)
    said = f"peak {peak_short / 1e6:.1f} MB ({n_short} frames), {peak_long / 1e6:.1f} MB ({n_long} frames)"
    assert (n_short, n_long) == (40_000, 120_000)
    assert peak_long < 1.25 * peak_short, said  # three times the frames, not three times the memory
    assert peak_long < 0.7 * n_long * 16 * 8, said
