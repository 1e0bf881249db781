"""The recording reader streams: chunks of whole lines in bounded memory, the same events and the same
replay as the whole file at once, and hostile rows refused in one line (issue 13)."""

from __future__ import annotations

import argparse
import os
import tracemalloc

import numpy as np
import pytest

from devices.faults import FaultPlan
from devices.simulator import SimBoard
from processing.recording import FORMAT_LINE, Mark, RecordingWriter, read_recording
from processing.recording_read import open_recording
from processing.session import Session
from protocol.errors import UserError
from protocol.events import FrameBlock
from tests.headless.helpers import write_recording
from tui.commands import replay

JUMP_S = 1000.0  # the host clock leaps forward (a laptop asleep) after row JUMP_ROW
JUMP_ROW = 700


@pytest.fixture(scope="module")
def hostile_sim(tmp_path_factory):
    """A sim recording with marks, link faults (lost, garbled lines, a reset) and a time jump."""
    folder = tmp_path_factory.mktemp("stream")
    faults = FaultPlan(drop_rate=0.01, garble_rate=0.01, resets_at_s=(9.0,))
    data = SimBoard("greenhouse", seed=2, faults=faults).run_for(22.0)
    path = folder / "rec.csv"
    marks = [Mark(2.0, "touch-start", "zone1", "hold zone 1"), Mark(4.0, "touch-end", "zone1"),
             Mark(5.0, "note", None, "a note"), Mark(6.0, "quiet-start"), Mark(7.0, "quiet-end")]
    write_recording(path, data, marks)
    lines = path.read_text().split("\n")
    rows = [i for i, line in enumerate(lines) if line[:1].isdigit()]
    for i in rows[JUMP_ROW:]:
        t, rest = lines[i].split(",", 1)
        lines[i] = f"{float(t) + JUMP_S:.6f},{rest}"
    path.write_text("\n".join(lines))
    text = path.read_text()
    assert "# fault" in text and "# mark" in text
    return path


def _replay_output(path, capsys, chunk_bytes: int, every_s: float | None) -> tuple[str, int]:
    args = argparse.Namespace(json=True, every=every_s, speed=0.0)
    with open_recording(path, chunk_bytes=chunk_bytes) as stream:
        chunks = []
        original = stream.chunks

        def counted():
            for chunk in original():
                chunks.append(len(chunk))
                yield chunk

        stream.chunks = counted  # type: ignore[method-assign]
        assert replay._replay(args, stream, Session()) == 0
    return capsys.readouterr().out, len(chunks)


@pytest.mark.parametrize("every_s", [None, 1.0, 0.3])
def test_a_streamed_replay_equals_the_whole_file_replay(hostile_sim, capsys, every_s):
    whole, whole_chunks = _replay_output(hostile_sim, capsys, 1 << 30, every_s)
    streamed, streamed_chunks = _replay_output(hostile_sim, capsys, 2048, every_s)
    assert whole_chunks == 1 and streamed_chunks > 20  # the small chunks really cut the file
    assert '"type":"touch"' in whole and '"type":"link"' in whole
    assert streamed == whole


def test_streamed_events_and_marks_equal_the_whole_file(hostile_sim):
    with open_recording(hostile_sim, chunk_bytes=1 << 30) as whole_stream:
        whole = whole_stream.read_all()
    with open_recording(hostile_sim, chunk_bytes=1000) as stream:
        marks = list(stream.marks)  # known before a single chunk is read
        parts = list(stream.chunks())
    events = [e for chunk in parts for e in chunk]
    assert len(parts) > 50
    assert marks == whole.marks and len(marks) == 5
    others = [e for e in events if not isinstance(e, FrameBlock)]
    assert others == [e for e in whole.events if not isinstance(e, FrameBlock)]
    blocks = [e for e in events if isinstance(e, FrameBlock)]
    for got, want in zip(_arrays(blocks), _arrays(whole.blocks), strict=True):
        assert np.array_equal(got, want)
    t_s = np.concatenate([b.t_s for b in blocks])
    assert t_s.max() > JUMP_S  # the jump is there


def _arrays(blocks: list[FrameBlock]) -> list[np.ndarray]:
    index = np.concatenate([b.first_index + np.arange(len(b)) for b in blocks])
    return [index, *(np.concatenate([getattr(b, k) for b in blocks]) for k in ("t_s", "seq", "readings"))]


def _big_recording(path, frames: int, channels: int = 64) -> None:
    rng = np.random.default_rng(7)
    with RecordingWriter(path, origin_t_s=0.0, clock=lambda: 0.0) as w:
        for start in range(0, frames, 500):
            idx = np.arange(start, start + 500)
            readings = rng.integers(9000, 30000, size=(500, channels)).astype(np.int64)
            w.write_events([FrameBlock(idx / 1000.0, idx, readings, start)])


def test_the_reader_holds_a_chunk_not_the_file(tmp_path):
    """tracemalloc's peak while streaming a ~4 MB recording in 64 KiB chunks stays near a chunk's worth
    (what is yielded is dropped at once here, as replay hands it to detection and forgets it)."""
    path = tmp_path / "big.csv"
    _big_recording(path, 10_000)
    size = path.stat().st_size
    assert size > 3_500_000
    chunk_bytes = 64 * 1024
    tracemalloc.start()
    try:
        rows = most = 0
        with open_recording(path, chunk_bytes=chunk_bytes) as stream:
            for chunk in stream.chunks():
                held = sum(len(e) for e in chunk if isinstance(e, FrameBlock))
                rows, most = rows + held, max(most, held)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert rows == 10_000
    assert most <= chunk_bytes // 300 + 1  # a row of 64 readings is over 300 bytes
    assert peak < size / 4, f"peak {peak} bytes for a {size}-byte file"


def _rec(body: str) -> str:
    return FORMAT_LINE + "\n# first_index=0\nt_s,seq,a,b\n" + body


@pytest.mark.parametrize(
    ("content", "says"),
    [
        (_rec("0.1,0,1,2\n# fault t_s=1 count=3\n"), "a fault row needs kind="),  # was a bare 'kind' KeyError
        (_rec("0.1,0,1,2\n# fault t_s=1 kind=meltdown\n"), "unknown fault kind 'meltdown'"),
        (_rec("0.1,0,1,2\n# fault t_s=1 kind=lost count=-4\n"), "count must be from 0"),
        (_rec("0.1,0,1,2\n# fault t_s=1 kind=lost count=many\n"), "count must be a whole number"),
        (_rec("0.1,0,1,2\n# link t_s=1 port=x\n"), "a link row needs state="),
        (_rec("0.1,0,1,2\n# board-changed t_s=1\n"), "a board-changed row needs channels="),
        (_rec("0.1,0,1,2\n# board-changed t_s=1 channels=100000\n"), "channels must be from 1 to 512"),
        (_rec("0.1,0,1,2\n# index value=" + "9" * 5000 + "\n"), "an index must be a whole number"),
        (FORMAT_LINE + "\n# first_index=" + "9" * 5000 + "\nt_s,seq,a\n0.1,0,1\n", "first_index must be"),
        (_rec("0.1,0,1,2\n# mark t_s=soon kind=note\n"), "t_s must be a time in seconds"),
        (_rec("0.1,0,1,2\n# note t_s=nan text=x\n"), "t_s must be a finite time"),
        (_rec("nan,0,1,2\n0.2,1,1,2\n"), ":4: a data row must hold"),
        (_rec("0.1,0,1,2\ninf,1,1,2\n"), ":5: a data row must hold"),
        (_rec("0.1,0," + "7" * 5000 + ",2\n"), ":4: a data row must hold"),
        (_rec("0.1,0,1\x002\n"), ":4: expected 4 columns"),
        (_rec("0.1,0,1,2,3\n"), ":4: expected 4 columns"),
        (FORMAT_LINE + "\nt_s,seq," + ",".join(f"c{i}" for i in range(100_000)) + "\n0.1,0\n",
         "the header names 100000 channels; a board has at most 512"),
        (FORMAT_LINE + "\n# info t_s=0 proto=1 channels=4\nt_s,se", "ends before its header row"),
        (FORMAT_LINE + "\nt_s,seq,a\n", "holds no frames"),
        ("", "no frames found"),
        ("\x00" * 5000, "no frames found"),
    ],
)
def test_hostile_recordings_are_one_line_without_python_internals(tmp_path, content, says):
    path = tmp_path / "rec.csv"
    path.write_text(content)
    with pytest.raises(UserError) as info:
        read_recording(path)
    message = str(info.value)
    assert says in message
    assert "\n" not in message and "Error" not in message and "set_int_max_str_digits" not in message
    assert "FaultKind" not in message and "'kind'" not in message and len(message) < 300


@pytest.mark.parametrize(
    "rows",
    [
        "0.2,0,1,2\n0.1,1,3,4\n0.3,2,5,6\n",  # time going backwards
        "0.1,0,1,2\nt_s,seq,a,b\n0.2,1,3,4\n",  # the header again (same names)
        "0.1,0,1,2\n\n0.2,1,3,4\n",  # an empty line
    ],
)
def test_odd_but_readable_rows_are_read(tmp_path, rows):
    path = tmp_path / "rec.csv"
    path.write_text(_rec(rows))
    assert read_recording(path).frames == sum(line[:1].isdigit() for line in rows.split("\n"))


def test_crlf_and_a_bom_read_like_the_plain_file(tmp_path):
    plain = _rec("0.1,0,1,2\n# mark t_s=0.15 kind=note text=hi\n0.2,1,3,4\n")
    (tmp_path / "lf.csv").write_text(plain)
    (tmp_path / "crlf.csv").write_bytes(plain.replace("\n", "\r\n").encode())
    (tmp_path / "bom.csv").write_bytes(b"\xef\xbb\xbf" + plain.encode())
    want = read_recording(tmp_path / "lf.csv")
    for name in ("crlf.csv", "bom.csv"):
        got = read_recording(tmp_path / name)
        assert got.marks == want.marks == [Mark(0.15, "note", None, "hi")]
        assert [b.readings.tolist() for b in got.blocks] == [b.readings.tolist() for b in want.blocks]


def test_non_regular_inputs_are_refused_at_once(tmp_path):
    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)  # nobody writes to it: opening it must not wait for a writer
    for path, says in ((fifo, "is a FIFO, not a regular file"),
                       ("/dev/zero", "is a character device, not a regular file"),
                       (tmp_path, "is a folder"), (tmp_path / "missing.csv", "no such file")):
        with pytest.raises(UserError, match=says):
            read_recording(path)


def test_a_line_longer_than_the_bound_is_refused_without_reading_on(tmp_path):
    path = tmp_path / "rec.csv"
    with open(path, "wb") as f:
        f.write(FORMAT_LINE.encode() + b"\n")
        f.write(b"\x00" * (3 << 20))  # a power loss's NUL tail without a line end
    with pytest.raises(UserError, match="a line longer than"):
        read_recording(path)
