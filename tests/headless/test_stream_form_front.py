"""What the front ends do with a plain form (issue 9, contract 11): the `hello` of monitor and replay,
the human hello line, the recording's `# form` row and header names, the raw-capture reader, and
`board_time` carried through the event buffer's overflow slice and replay's re-chunking."""

from __future__ import annotations

import io

import numpy as np

from processing.recording import RecordingWriter, header_names, parse_raw_capture, read_recording
from processing.session import Session
from protocol.decoder import Decoder
from protocol.eventbuffer import EventBuffer
from protocol.events import BoardInfo, FrameBlock, StreamForm
from tests.headless.helpers import json_lines
from tui.commands.replay import paced
from tui.headless.output import HumanOutput, JsonLinesOutput, make_console
from tui.headless.runner import DetectionRun

PAIRS = b"".join(b"t:%d zone1:%d.%d zone2:%d.5\r" % (1000 + 10 * k, 12 + k % 2, k % 10, 15)
                 for k in range(12))


def decoded(data: bytes) -> list:
    dec = Decoder()
    return dec.feed(data, 0.0) + dec.flush_hold(0.0)


def hellos(events: list) -> list[dict]:
    out = io.StringIO()
    run = DetectionRun(Session(), JsonLinesOutput(out))
    run.feed(events, 0.0)
    run.finish(0.0)
    return [e for e in json_lines(out.getvalue()) if e["type"] == "hello"]


def test_a_plain_forms_hello_says_how_the_stream_is_read():
    (hello,) = hellos(decoded(PAIRS))
    assert hello["form"] == "pairs" and hello["scale"] == 10 and hello["time_column"] is True
    assert hello["names"] == ["zone1", "zone2"] and hello["channels"] == 2 and hello["board"] is None
    assert "board's time" in hello["detail"]


def test_columns_hello_takes_its_width_from_the_frames_that_follow():
    (hello,) = hellos(decoded(b"".join(b"  %4d  %4d  %4d\n" % (1200 + k % 3, 1500, 900) for k in range(9))))
    assert (hello["form"], hello["names"], hello["channels"], hello["scale"]) == ("columns", [], 3, 1)


def test_an_info_lines_hello_is_v1_unless_a_plain_form_was_read():
    info = b"! proto=1 board=bench channels=2\n"
    (hello,) = hellos(decoded(info + b"@0 1 2\n"))
    assert (hello["form"], hello["scale"], hello["time_column"], hello["board"]) == ("v1", 1, False, "bench")
    later = hellos(decoded(PAIRS + b"! board=bench\r"))  # an answer to `?` after a plain form
    assert [h["form"] for h in later] == ["pairs", "pairs"] and later[1]["scale"] == 10
    assert later[1]["board"] == "bench"


def test_the_human_hello_line_says_the_form_in_words():
    out = io.StringIO()
    human = HumanOutput(make_console(out))
    human.hello(0.5, {"board": None, "channels": 2, "names": ["zone1", "zone2"], "form": "pairs",
                      "scale": 100, "time_column": True})
    human.hello(0.6, {"board": "bench", "channels": None, "names": [], "form": "v1", "scale": 1})
    first, second = out.getvalue().splitlines()
    assert "unnamed board: 2 channels (zone1, zone2); read as pairs, readings x100 (decimals kept)" in first
    assert first.endswith("first column is the board's time")
    assert "bench: ? channels" in second and "read as" not in second


def test_the_recording_keeps_the_form_and_its_names(tmp_path):
    events = decoded(PAIRS)
    path = tmp_path / "pairs.csv"
    with RecordingWriter(path, origin_t_s=0.0, clock=lambda: 0.0) as writer:
        writer.write_events(events)
    text = path.read_text()
    assert "# form t_s=0.000000 form=pairs scale=10 time_column=1 names=zone1,zone2 text=pairs read" in text
    assert "\nt_s,seq,zone1,zone2\n" in text
    rec = read_recording(path)
    (form,) = [e for e in rec.events if isinstance(e, StreamForm)]
    assert (form.form, form.names, form.scale, form.time_column) == ("pairs", ("zone1", "zone2"), 10, True)
    assert rec.names == ("zone1", "zone2") and rec.frames == 12
    assert rec.blocks[0].readings[:2].tolist() == [[120, 155], [131, 155]]  # 12.0 and 15.5 at x10


def test_an_info_lines_names_win_and_bad_names_become_chN(tmp_path):
    path = tmp_path / "named.csv"
    info = BoardInfo(0.0, {"names": "left,right"}, names=("left", "right"))
    with RecordingWriter(path, origin_t_s=0.0, clock=lambda: 0.0) as writer:
        writer.write_events([info, *decoded(PAIRS)])
    assert "\nt_s,seq,left,right\n" in path.read_text()
    assert header_names(("zone 1", "b", "b", "ok"), 4) == ("ch0", "b", "ch2", "ok")
    assert header_names(("", "x"), 2) == ("ch0", "x")
    assert header_names(("ch1", "zone 2"), 2) == ("ch0", "ch1")  # "ch1" met a fallback: all defaults
    assert header_names(("a",), 2) == ("ch0", "ch1")


def test_a_raw_capture_in_a_plain_form_with_cr_line_ends(tmp_path):
    """Fewer lines than a form is decided on, CR-only: all read, each frame at its own made-up time."""
    data = b"Touch demo\rzone1:12 zone2:15\rzone1:13 zone2:15\rzone1:12 zone2:16\r"
    rec = parse_raw_capture(data, rate_hz=50)
    assert rec.frames == 3 and rec.names == ("zone1", "zone2") and not rec.truncated
    t_s, _, readings = rec.arrays()
    assert t_s.tolist() == [0.0, 0.02, 0.04] and readings.tolist() == [[12, 15], [13, 15], [12, 16]]
    assert parse_raw_capture(b"1 2\r3 4\r5", rate_hz=50).truncated


def test_board_time_survives_the_overflow_slice_and_replays_rechunking():
    block = FrameBlock(np.arange(10) / 100, np.full(10, -1), np.ones((10, 2), np.int64), 0,
                       board_time=np.arange(1000, 1100, 10))
    buffer = EventBuffer(max_frames=4)
    buffer.put([block])
    kept = buffer.drain()[0]
    assert kept.board_time.tolist() == [1000, 1010, 1020, 1030]
    slices = [b[0] for b, _ in paced([block], 0.03)]
    assert [s.board_time.tolist() for s in slices][:2] == [[1000, 1010, 1020], [1030, 1040, 1050]]
    assert sum(len(s) for s in slices) == 10
