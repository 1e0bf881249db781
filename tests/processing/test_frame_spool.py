"""A recording spooled to disk (`processing.frame_spool`) serves exactly the frames the whole-file reader
gives, in regular pieces, in memory that does not grow with the recording, and leaves nothing behind.

References: `RecordingStream.read_all` (the plain reader: every event in memory; `arrays()` the frames
of the last width) for what is kept of a recording; numpy's `np.searchsorted` on those times for
`times_to_frames`; `tracemalloc` (Python's standard library) for the peak of what numpy and Python
allocate; the operating system itself for the failures (a missing folder, a file in its place,
/dev/full's ENOSPC, RLIMIT_FSIZE's EFBIG).
"""

from __future__ import annotations

import os
import subprocess
import sys
import tracemalloc
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest

import processing.frame_spool as frame_spool
from processing.frame_source import PIECE_FRAMES
from processing.frame_spool import spool_frames
from processing.recording import RecordingWriter
from processing.recording_format import Recording
from processing.recording_read import open_recording
from protocol.encoder import encode_frames, encode_info
from protocol.errors import UserError
from protocol.events import FrameBlock
from tests.processing.test_tune_memory import write_made_up

ROOT = Path(__file__).resolve().parents[2]


def spooled(path: Path, spool_dir: Path, chunk_bytes: int = 1 << 22, piece_frames: int = PIECE_FRAMES):
    with open_recording(path, chunk_bytes=chunk_bytes) as stream:
        return spool_frames(stream, str(spool_dir), piece_frames=piece_frames)


@dataclass
class Held:
    """What the plain reader gives of a recording, in the names the checks below compare."""

    rec: Recording
    t_s: np.ndarray
    readings: np.ndarray

    def __getattr__(self, name: str):
        return getattr(self.rec, name)


def held(path: Path, chunk_bytes: int = 1 << 22) -> Held:
    with open_recording(path, chunk_bytes=chunk_bytes) as stream:
        rec = stream.read_all()
    t_s, _, readings = rec.arrays()
    return Held(rec, t_s, readings)


def whole(spool) -> tuple[np.ndarray, np.ndarray]:
    """Every piece of one pass, concatenated (times, readings)."""
    pieces = list(spool.pieces())
    if not pieces:
        return np.zeros(0), np.zeros((0, spool.width), np.int32)
    return np.concatenate([p.t_s for p in pieces]), np.concatenate([p.readings for p in pieces])


def assert_same_as_held(spool, frames) -> None:
    t_s, readings = whole(spool)
    assert np.array_equal(t_s, frames.t_s) and t_s.dtype == np.float64
    assert np.array_equal(readings, frames.readings) and readings.dtype == np.int32
    assert spool.frames == len(frames.t_s) and spool.width == frames.readings.shape[1]
    assert (spool.path, spool.names, spool.marks, spool.truncated, spool.info) == \
        (frames.path, frames.names, frames.marks, frames.truncated, frames.info)
    assert (spool.channels, spool.rate_hz) == (frames.channels, frames.rate_hz)
    assert (spool.t_first_s, spool.t_last_s) == (float(frames.t_s[0]), float(frames.t_s[-1]))


def write_raw_capture(path: Path, channels: int, frames: int, seed: int = 5) -> None:
    """Protocol lines as a board prints them (an info line, then frames with seq and checksum)."""
    rng = np.random.default_rng(seed)
    readings = 20000 + rng.integers(-50, 51, size=(frames, channels))
    info = encode_info({"proto": 1, "board": "pump-house", "channels": channels, "rate": 250,
                        "names": ",".join(f"p{c}" for c in range(channels))})
    path.write_bytes(info + encode_frames(readings, first_seq=0))


def write_widths(path: Path, widths: list[tuple[int, int]], t_step_s: float = 0.01) -> None:
    """Blocks of (channels, frames) one after another, each block's frames after the last (a header row
    each time the width changes), through padtune's own writer."""
    rng = np.random.default_rng(11)
    with RecordingWriter(path, origin_t_s=0.0, clock=lambda: 0.0, source="test") as w:
        at = 0
        for channels, frames in widths:
            idx = np.arange(at, at + frames)
            r = rng.integers(-(2**31), 2**31, size=(frames, channels))  # the int32 range, both ends
            w.write_events([FrameBlock(idx * t_step_s, idx % 65536, r, at)])
            at += frames


def test_a_padtune_recording_spools_to_exactly_what_the_plain_reader_gives(tmp_path: Path) -> None:
    path = tmp_path / "r.csv"
    write_made_up(path, channels=6, frames=12_000, marks=True)
    with spooled(path, tmp_path, 1 << 16, piece_frames=1000) as spool:
        frames = held(path)
        assert_same_as_held(spool, frames)
        assert spool.marks and spool.info is not None and spool.names == tuple(f"k{c:02d}" for c in range(6))


def test_a_raw_capture_spools_to_exactly_what_the_plain_reader_gives(tmp_path: Path) -> None:
    path = tmp_path / "c.raw"
    write_raw_capture(path, channels=5, frames=7_001)
    with spooled(path, tmp_path, 1 << 15, piece_frames=999) as spool:
        frames = held(path)
        assert_same_as_held(spool, frames)
        assert spool.rate_hz == 250.0 and spool.marks == [] and len(frames.t_s) == 7_001


@pytest.mark.parametrize("widths", [
    [(4, 3000), (6, 2500)],  # a board that changed: only the 6-wide frames are tuned
    [(4, 3000), (6, 2500), (4, 1700), (6, 10), (4, 800)],  # interleaved: every 4-wide block, in order
])
def test_only_the_last_width_is_kept_as_the_plain_reader_keeps_it(tmp_path: Path, widths) -> None:
    path = tmp_path / "w.csv"
    write_widths(path, widths)
    last = widths[-1][0]
    with spooled(path, tmp_path, 1 << 14, piece_frames=700) as spool:
        frames = held(path, 1 << 14)
        assert_same_as_held(spool, frames)
        assert spool.width == last and spool.frames == sum(n for w, n in widths if w == last)
        # readings at both ends of 32 bits come back exactly (int32 holds them)
        _, readings = whole(spool)
        assert readings.min() < -(2**31) + 2**24 and readings.max() > 2**31 - 2**24
        q = np.concatenate([frames.t_s[::37], frames.t_s[::53] + 0.004, [-1.0, 1e9]])
        assert np.array_equal(spool.times_to_frames(q), np.searchsorted(frames.t_s, q))


@pytest.mark.parametrize("chunk_bytes", [1 << 13, 1 << 16, 1 << 22])
def test_pieces_are_regular_whatever_the_decoder_chunks(tmp_path: Path, chunk_bytes: int) -> None:
    path = tmp_path / "r.csv"
    write_made_up(path, channels=3, frames=10_000, marks=False)
    frames = held(path)
    with spooled(path, tmp_path, chunk_bytes, piece_frames=1024) as spool:
        pieces = list(spool.pieces())
        assert [p.start for p in pieces] == list(range(0, 10_000, 1024))
        assert [len(p) for p in pieces] == [1024] * 9 + [10_000 - 9 * 1024]
        for p in pieces:
            assert p.readings.shape == (len(p), 3) and p.readings.dtype == np.int32
            assert p.readings.flags.c_contiguous and p.readings.flags.writeable
        again = whole(spool)  # a second pass is a fresh pass: the same frames
        assert np.array_equal(again[0], frames.t_s) and np.array_equal(again[1], frames.readings)


def test_the_default_piece_is_piece_frames(tmp_path: Path) -> None:
    path = tmp_path / "r.csv"
    write_made_up(path, channels=2, frames=PIECE_FRAMES + 5, marks=False)
    with spooled(path, tmp_path) as spool:
        assert [len(p) for p in spool.pieces()] == [PIECE_FRAMES, 5]


def test_times_to_frames_is_numpy_searchsorted(tmp_path: Path) -> None:
    """Sorted and unsorted queries, over times that go forward and over times that leap back (numpy's
    answer for an unsorted array is whatever its bisection gives: the spool must give the same)."""
    rng = np.random.default_rng(2)
    path = tmp_path / "r.csv"
    write_made_up(path, channels=2, frames=5_000, marks=False)
    back = tmp_path / "back.csv"
    with RecordingWriter(back, origin_t_s=0.0, clock=lambda: 0.0, source="test") as w:
        for start, t0 in ((0, 5.0), (2000, 1.0), (3500, 9.0)):  # host times that leap back and forth
            t_s = t0 + np.arange(1500) / 1000.0
            w.write_events([FrameBlock(t_s, np.arange(1500), rng.integers(0, 99, (1500, 2)), start)])
    for p in (path, back):
        frames = held(p)
        with spooled(p, tmp_path, piece_frames=512) as spool:
            t = frames.t_s
            queries = np.concatenate([t, t + 1e-4, t - 1e-4, [-5.0, 0.0, 1e6], rng.uniform(-1, 12, 3000)])
            for q in (np.sort(queries), rng.permutation(queries)):
                got = spool.times_to_frames(q)
                assert got.dtype == np.int64 and np.array_equal(got, np.searchsorted(t, q))
            assert spool.times_to_frames([0.5]).tolist() == np.searchsorted(t, [0.5]).tolist()


def _spool_peak(path: Path, spool_dir: Path) -> tuple[float, int]:
    """Peak bytes (tracemalloc) while spooling, making one pass over the pieces and asking for times."""
    tracemalloc.start()
    try:
        with open_recording(path, chunk_bytes=1 << 20) as stream, \
                spool_frames(stream, str(spool_dir)) as spool:
            total = 0
            for piece in spool.pieces():
                total += int(piece.readings[:, 0].astype(np.int64).sum())
            spool.times_to_frames(np.linspace(0.0, 1000.0, 101))
            frames = spool.frames
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    return peak, frames


def test_spooling_memory_does_not_grow_with_the_recording(tmp_path: Path) -> None:
    """300,000 and 900,000 frames x 16 channels (33 MB and 100 MB of CSV): the plain reader would hold their
    int32 readings and times (24 MB and 72 MB); the spool holds one 1 MiB chunk being converted and one
    piece (measured: 10.3 MB for both; the bound leaves room for numpy's own temporaries)."""
    short, long = tmp_path / "short.csv", tmp_path / "long.csv"
    write_made_up(short, channels=16, frames=300_000, marks=False)
    write_made_up(long, channels=16, frames=900_000, marks=False)
    peak_short, n_short = _spool_peak(short, tmp_path)
    peak_long, n_long = _spool_peak(long, tmp_path)
    held_short = n_short * (16 * 4 + 8)  # the readings as int32 readings and float64 times
    said = f"peak {peak_short / 1e6:.1f} MB (300k frames), {peak_long / 1e6:.1f} MB (900k frames)"
    assert (n_short, n_long) == (300_000, 900_000)
    assert peak_short < 0.6 * held_short and peak_short < 16e6, said
    assert peak_long < 1.1 * peak_short, said  # three times the frames, not more memory


def test_nothing_is_left_in_the_spool_folder(tmp_path: Path) -> None:
    path = tmp_path / "r.csv"
    write_made_up(path, channels=4, frames=6_000, marks=False)
    folder = tmp_path / "spool"
    folder.mkdir()
    with spooled(path, folder) as spool:
        assert os.listdir(folder) == []  # unnamed while open: a kill -9 leaves nothing either
        assert spool.frames == 6_000
    assert os.listdir(folder) == []
    # damage near the end: the spool had written most frames when the reader refused the file
    lines = path.read_text().split("\n")
    lines[-100] = "1.0,1,2,x,4,5"
    bad = tmp_path / "bad.csv"
    bad.write_text("\n".join(lines))
    with pytest.raises(UserError, match=r"bad\.csv:\d+"):
        spooled(bad, folder, chunk_bytes=1 << 14)
    assert os.listdir(folder) == []


_KILLED_WHILE_OPEN = """
import sys, time
sys.path.insert(0, sys.argv[3])
from processing.frame_spool import spool_frames
from processing.recording_read import open_recording
with open_recording(sys.argv[1]) as stream, spool_frames(stream, sys.argv[2]) as spool:
    print(spool.frames, flush=True)
    time.sleep(120)
"""


@pytest.mark.skipif(sys.platform != "linux", reason="SIGKILL as on Linux")
def test_a_process_killed_while_it_holds_a_spool_leaves_nothing(tmp_path: Path) -> None:
    path = tmp_path / "r.csv"
    write_made_up(path, channels=4, frames=6_000, marks=False)
    folder = tmp_path / "spool"
    folder.mkdir()
    child = subprocess.Popen([sys.executable, "-c", _KILLED_WHILE_OPEN, str(path), str(folder), str(ROOT)],
                             stdout=subprocess.PIPE, text=True)
    try:
        assert child.stdout is not None and child.stdout.readline() == "6000\n"  # spooled, files open
    finally:
        child.kill()  # SIGKILL: no cleanup runs in the child
        child.communicate(timeout=60)
    assert child.returncode == -9 and os.listdir(folder) == []


class _OneBlock:
    """A stream that yields one block (what the recording reader never does: a reading outside 32 bits)."""

    path, names, marks, truncated, is_csv = "odd.csv", ("a",), [], False, True

    def chunks(self):
        yield [FrameBlock(np.array([0.0, 0.1]), np.array([0, 1]), np.array([[5], [2**31]]), 0)]


def test_a_reading_outside_32_bits_is_a_user_error_not_a_wrapped_number(tmp_path: Path) -> None:
    with pytest.raises(UserError) as caught:
        spool_frames(_OneBlock(), str(tmp_path))  # type: ignore[arg-type]
    assert str(caught.value) == ("odd.csv: a reading outside 32 bits (2147483648): the file is damaged or "
                                 "not a padtune recording")
    assert os.listdir(tmp_path) == []


def _one_line(exc: UserError, folder: object, reason: str) -> None:
    text = str(exc)
    assert "\n" not in text
    assert text.startswith(f"cannot spool the recording's frames to {folder}: {reason} (")
    assert "Errno" not in text and "Error" not in text


def test_a_missing_folder_or_a_file_in_its_place_is_one_line(tmp_path: Path) -> None:
    path = tmp_path / "r.csv"
    write_made_up(path, channels=2, frames=2_000, marks=False)
    missing = tmp_path / "nowhere"
    with pytest.raises(UserError) as caught:
        spooled(path, missing)
    _one_line(caught.value, missing, "No such file or directory")
    assert str(caught.value).endswith("(spool to a folder padtune can write)")
    with pytest.raises(UserError) as caught:
        spooled(path, path)
    _one_line(caught.value, path, "Not a directory")


@pytest.mark.skipif(os.geteuid() == 0, reason="root writes into a read-only folder: the mode stops no one")
def test_a_folder_that_cannot_be_written_is_one_line(tmp_path: Path) -> None:
    path = tmp_path / "r.csv"
    write_made_up(path, channels=2, frames=2_000, marks=False)
    folder = tmp_path / "locked"
    folder.mkdir(mode=0o500)
    with pytest.raises(UserError) as caught:
        spooled(path, folder)
    _one_line(caught.value, folder, "Permission denied")


def test_a_full_disk_is_one_line_and_the_spool_is_let_go(tmp_path: Path, monkeypatch) -> None:
    """/dev/full: every write fails as on a full disk (ENOSPC from the kernel), after opening fine."""
    if not os.path.exists("/dev/full"):
        pytest.skip("no /dev/full on this system")
    path = tmp_path / "r.csv"
    write_made_up(path, channels=2, frames=2_000, marks=False)
    opened = []

    def full(dir: str, buffering: int):  # TemporaryFile's own keywords
        opened.append(open("/dev/full", "r+b", buffering=buffering))  # noqa: SIM115
        return opened[-1]

    monkeypatch.setattr(frame_spool.tempfile, "TemporaryFile", full)
    with pytest.raises(UserError) as caught:
        spooled(path, tmp_path)
    _one_line(caught.value, tmp_path, "No space left on device")
    assert str(caught.value).endswith("(spool to a folder with room)")
    assert len(opened) == 2 and all(f.closed for f in opened)


_FILE_SIZE_LIMIT = """
import resource, signal, sys
sys.path.insert(0, sys.argv[3])
from processing.frame_spool import spool_frames
from processing.recording_read import open_recording
from protocol.errors import UserError
signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # a write past the limit fails with EFBIG, not a signal
resource.setrlimit(resource.RLIMIT_FSIZE, (200_000, resource.RLIM_INFINITY))
try:
    with open_recording(sys.argv[1]) as stream:
        spool_frames(stream, sys.argv[2])
except UserError as exc:
    print(exc)
"""


@pytest.mark.skipif(sys.platform != "linux", reason="RLIMIT_FSIZE and SIGXFSZ as on Linux")
def test_a_file_size_limit_hit_while_spooling_is_one_line(tmp_path: Path) -> None:
    """A real write refused by the kernel part way (the spool's files may grow to 200 kB: the readings
    need 640 kB), as a full disk refuses one."""
    path = tmp_path / "r.csv"
    write_made_up(path, channels=8, frames=20_000, marks=False)
    folder = tmp_path / "spool"
    folder.mkdir()
    out = subprocess.run([sys.executable, "-c", _FILE_SIZE_LIMIT, str(path), str(folder), str(ROOT)],
                         capture_output=True, text=True, timeout=120)
    assert out.returncode == 0 and out.stderr == "", out.stderr
    assert out.stdout == f"cannot spool the recording's frames to {folder}: File too large " \
                         "(spool to a folder with room)\n"
    assert os.listdir(folder) == []


def test_without_a_folder_the_hint_names_tmpdir(tmp_path: Path, monkeypatch) -> None:
    path = tmp_path / "r.csv"
    write_made_up(path, channels=2, frames=2_000, marks=False)
    missing = tmp_path / "gone"
    monkeypatch.setattr(frame_spool.tempfile, "gettempdir", lambda: str(missing))
    with open_recording(path) as stream, pytest.raises(UserError) as caught:
        spool_frames(stream)
    _one_line(caught.value, missing, "No such file or directory")
    assert str(caught.value).endswith("(set TMPDIR to a folder padtune can write)")
