"""The CSV recording format: round trip of every event kind, crash tolerance, and damaged files."""

from __future__ import annotations

import csv
import io
import os
import struct
import subprocess
import sys
import textwrap
import time

import numpy as np
import pytest

from processing.recording import (
    FORMAT_LINE,
    Mark,
    RecordingWriter,
    info_from_fields,
    parse_recording_text,
    read_recording,
)
from protocol.errors import UserError
from protocol.events import (
    BoardChanged,
    FaultKind,
    FrameBlock,
    LinkFault,
    LinkState,
    LinkStatus,
    Note,
)


class FakeClock:
    def __init__(self, t_s: float = 100.0) -> None:
        self.t_s = t_s

    def __call__(self) -> float:
        return self.t_s


def block(first_index: int, t0: float, readings: list[list[int]], seq0: int | None = 0) -> FrameBlock:
    n = len(readings)
    seq = np.arange(seq0, seq0 + n) if seq0 is not None else np.full(n, -1)
    return FrameBlock(
        t_s=t0 + np.arange(n) * 0.01,
        seq=seq.astype(np.int64),
        readings=np.array(readings, dtype=np.int64),
        first_index=first_index,
    )


INFO = info_from_fields(
    {"proto": "1", "board": "greenhouse", "channels": "3", "rate": "100", "names": "zone1,zone2,stop",
     "polarity": "-", "fw": "0.3"},
    100.0,
)


def write_sample(path, clock: FakeClock) -> None:
    w = RecordingWriter(path, source="sim://greenhouse?speed=4", clock=clock, wall_clock=lambda: 0.0)
    w.write_events([INFO, block(0, 100.01, [[1000, 2000, 3000], [1001, 1999, 3002]])])
    w.mark(100.5, "touch-start", "zone1", "hold zone 1 please")
    w.write_events([
        Note(100.6, "board says hi"),
        LinkFault(100.7, FaultKind.LOST, 3, "gap 4..7"),
        block(5, 100.8, [[990, 2001, 3001]], seq0=7),
        LinkStatus(100.9, LinkState.DISCONNECTED, "/dev/pts/9", "read failed"),
        BoardChanged(101.0, 3, 2),
        block(6, 101.1, [[5, 6], [7, 8]], seq0=None),
    ])
    w.close()


def test_round_trip_keeps_every_event_in_order(tmp_path):
    path = tmp_path / "rec.csv"
    write_sample(path, FakeClock(100.0))
    rec = read_recording(path)
    assert rec.version == 1 and not rec.truncated
    assert rec.meta["source"] == "sim://greenhouse?speed=4"
    assert rec.meta["start_utc"] == "1970-01-01T00:00:00.000000Z"
    kinds = [type(e).__name__ for e in rec.events]
    assert kinds == ["BoardInfo", "FrameBlock", "Note", "LinkFault", "FrameBlock", "LinkStatus",
                     "BoardChanged", "FrameBlock"]
    info = rec.events[0]
    assert info.names == ("zone1", "zone2", "stop") and info.polarity == (-1,) and info.new_session
    assert info.rate_hz == 100.0 and info.channels == 3
    b0, b1, b2 = rec.blocks
    assert b0.readings.tolist() == [[1000, 2000, 3000], [1001, 1999, 3002]]
    assert b0.seq.tolist() == [0, 1] and b0.first_index == 0
    np.testing.assert_allclose(b0.t_s, [0.01, 0.02], atol=1e-6)
    assert b1.first_index == 5 and b1.seq.tolist() == [7]  # index jump kept
    assert b2.first_index == 6 and b2.seq.tolist() == [-1, -1] and b2.channels == 2
    fault = rec.events[3]
    assert fault.kind is FaultKind.LOST and fault.count == 3 and fault.detail == "gap 4..7"
    status = rec.events[5]
    assert status.state is LinkState.DISCONNECTED and status.port == "/dev/pts/9"
    assert rec.marks == [Mark(pytest.approx(0.5), "touch-start", "zone1", "hold zone 1 please")]
    assert rec.names == ("ch0", "ch1")  # the header after the board change


def test_file_is_plain_csv_after_the_comments(tmp_path):
    # Outside reference: the stdlib csv module reads the data part as ordinary CSV.
    path = tmp_path / "rec.csv"
    w = RecordingWriter(path, clock=FakeClock(), info=INFO)
    w.write_events([block(0, 100.0, [[1, 2, 3], [4, 5, 6]])])
    w.close()
    text = path.read_text()
    assert text.startswith(FORMAT_LINE + "\n")
    rows = list(csv.reader(io.StringIO("".join(
        line for line in text.splitlines(keepends=True) if not line.startswith("#")))))
    assert rows[0] == ["t_s", "seq", "zone1", "zone2", "stop"]
    assert rows[1:] == [["0.000000", "0", "1", "2", "3"], ["0.010000", "1", "4", "5", "6"]]


def test_partial_last_line_is_dropped_and_flagged(tmp_path):
    path = tmp_path / "rec.csv"
    write_sample(path, FakeClock())
    data = path.read_bytes()
    assert data.endswith(b",-1,7,8\n")
    path.write_bytes(data[:-3])  # a crash mid-row of the last frame
    rec = read_recording(path)
    assert rec.truncated
    assert rec.blocks[-1].readings.tolist() == [[5, 6]]


def test_writer_refuses_to_overwrite(tmp_path):
    path = tmp_path / "rec.csv"
    path.write_text("precious")
    with pytest.raises(UserError, match="already exists"):
        RecordingWriter(path)
    assert path.read_text() == "precious"
    RecordingWriter(path, overwrite=True).close()
    assert path.read_text().startswith(FORMAT_LINE)


def test_writer_flushes_on_its_interval_only(tmp_path):
    clock = FakeClock(0.0)
    path = tmp_path / "rec.csv"
    w = RecordingWriter(path, clock=clock, flush_interval_s=0.25)
    header_only = path.read_bytes()
    w.write_events([block(0, 0.0, [[1]])])
    assert path.read_bytes() == header_only  # buffered
    clock.t_s = 0.3
    w.maybe_flush()
    assert path.read_bytes().endswith(b"0.000000,0,1\n")
    w.close()


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("hello\n", "not a padtune recording"),
        ("# padtune recording v2\n", "newer than this padtune reads"),
        (FORMAT_LINE + "\nt_s,seq,a\n0.1,0,1,2\n0.2,1,1\n", ":3: expected 3 columns"),
        (FORMAT_LINE + "\n0.1,0,1\n", ":2: a data row before the header"),
        (FORMAT_LINE + "\nt_s,seq,a\n0.1,x,1\n", ":3: a data row must hold"),
        (FORMAT_LINE + "\n# fault t_s=1 kind=melted\n", ":2:"),
    ],
)
def test_damaged_files_raise_one_line_user_errors(text, message):
    with pytest.raises(UserError, match=message) as info:
        parse_recording_text(text, "f.csv")
    assert "\n" not in str(info.value)


def test_unreadable_paths(tmp_path):
    with pytest.raises(UserError, match="no such file"):
        read_recording(tmp_path / "missing.csv")
    with pytest.raises(UserError, match="is a folder"):
        read_recording(tmp_path)
    (tmp_path / "bin.csv").write_bytes(FORMAT_LINE.encode() + b"\n\xff\xfe\n")
    with pytest.raises(UserError, match="UTF-8"):
        read_recording(tmp_path / "bin.csv")


def test_unknown_metadata_and_stream_kinds_are_kept_or_skipped():
    text = FORMAT_LINE + "\n# future_key=42\n# sparkle t_s=1 x=2\nt_s,seq,a\n0.5,0,7\n"
    rec = parse_recording_text(text)
    assert rec.meta["future_key"] == "42"
    assert rec.blocks[0].readings.tolist() == [[7]]


def test_kill_minus_nine_loses_at_most_the_flush_interval(tmp_path):
    """A writer process killed mid-run leaves a readable file holding all but the last moments."""
    path = tmp_path / "rec.csv"
    made = tmp_path / "made.bin"  # the child's latest frame time, shared through the page cache
    made.write_bytes(bytes(8))
    script = textwrap.dedent(
        f"""
        import mmap, struct, time
        import numpy as np
        from processing.recording import RecordingWriter
        from protocol.events import FrameBlock
        with open({str(made)!r}, "r+b") as f:
            made = mmap.mmap(f.fileno(), 8)
        w = RecordingWriter({str(path)!r}, flush_interval_s=0.25)
        i = 0
        while True:
            t = time.monotonic()
            struct.pack_into("d", made, 0, t - w.origin_t_s)  # before: the file never runs ahead of it
            w.write_events([FrameBlock(np.array([t]), np.array([i]), np.array([[i, 2 * i]]), i)])
            if i == 20:
                print("running", flush=True)
            i += 1
            time.sleep(0.002)
        """
    )
    proc = subprocess.Popen([sys.executable, "-c", script], stdout=subprocess.PIPE, text=True,
                            cwd=os.getcwd())
    try:
        assert proc.stdout.readline().strip() == "running"
        time.sleep(1.0)  # let it write a while: the kill comes at no moment in particular
        proc.kill()
        proc.wait(10)
    finally:
        if proc.poll() is None:
            proc.kill()
    rec = read_recording(path)
    t_s, seq, readings = rec.arrays()
    assert len(seq) > 20
    assert seq.tolist() == list(range(len(seq)))  # nothing missing, every row whole
    assert (readings[:, 1] == 2 * readings[:, 0]).all()
    # Measured against the last frame the child handed to the writer (not against the kill time, which
    # would count the moments a loaded machine did not run the child at all): the spec allows losing
    # at most the last second; the writer hands rows over every 0.25 s.
    last_made_s = struct.unpack("d", made.read_bytes())[0]
    lost_s = last_made_s - t_s[-1]
    # Rows store times to the microsecond (`:.6f`): a row written just before the kill can read back up
    # to half a microsecond after the time it was made, so nothing lost may show as -5e-7 s.
    assert -5e-7 <= lost_s < 1.0


def test_start_utc_is_the_wall_time_of_the_origin(tmp_path):
    """An origin taken before the port opened (as `record` and `monitor` do) dates the file from it."""
    w = RecordingWriter(tmp_path / "o.csv", origin_t_s=99.5, clock=FakeClock(100.0), wall_clock=lambda: 60.0)
    w.write_events([block(0, 100.0, [[1]])])
    w.close()
    rec = read_recording(tmp_path / "o.csv")
    assert rec.meta["start_utc"] == "1970-01-01T00:00:59.500000Z"
    assert rec.arrays()[0].tolist() == [0.5]


@pytest.mark.parametrize(
    ("body", "message"),
    [
        ("t_s,seq,a\n0.1,0,99999999999999999999999\n", ":3: a data row must hold"),  # was an OverflowError
        ("t_s,seq,a\n0.1,0,2147483648\n", ":3: a data row must hold"),  # one past int32
        ("t_s,seq\n0.1,0\n", ":2: the header"),  # no channel at all
        ("t_s,seq,a,\n0.1,0,1,2\n", ":2: the header"),  # an unnamed column
    ],
)
def test_a_damaged_recording_is_one_line_naming_the_row(tmp_path, body, message):
    (tmp_path / "bad.csv").write_text(FORMAT_LINE + "\n" + body)
    with pytest.raises(UserError, match=message):
        read_recording(tmp_path / "bad.csv")
