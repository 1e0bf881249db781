"""The quick ways replay reads and measures (issue 13) give what the plain ways give.

Outside references: Python's own `float()` / `int()` of each cell for the data rows; a plain per-frame
loop of the settle rule over "any key busy" with `collections.deque(maxlen=...)` as the noise window;
the recording's rows read without its mark rows for the frames; the walk through the marks in time
order that `DetectionRun` used before (copied here) for the touch judgements.
"""

from __future__ import annotations

import subprocess
import sys
from collections import deque
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from processing.detections import KeyState
from processing.measure import Measures
from processing.recording import FORMAT_LINE, Mark, read_recording
from processing.recording_parse import _float_rows, _whole_rows, check_rows, parse_recording_text
from protocol.errors import UserError
from tui.headless.runner import MarkIndex

ROOT = Path(__file__).resolve().parents[2]
RELEASED, TOUCHED = int(KeyState.RELEASED), int(KeyState.TOUCHED)


def _plain_rows(rows: list[str], width: int) -> tuple[list[float], list[int], list[list[int]]] | None:
    """Each cell through Python's float() / int() (None where a row is not a time and 32-bit integers)."""
    t_s, seq, readings = [], [], []
    for row in rows:
        cells = row.split(",")
        if len(cells) != width + 2:
            return None
        try:
            t, ints = float(cells[0]), [int(c) for c in cells[1:]]
        except ValueError:
            return None
        if not np.isfinite(t) or not all(-2**31 <= v < 2**31 for v in ints):
            return None
        t_s.append(t)
        seq.append(ints[0])
        readings.append(ints[1:])
    return t_s, seq, readings


@settings(max_examples=80, deadline=None)
@given(st.integers(1, 6), st.lists(st.tuples(st.integers(0, 10**6), st.lists(
    st.integers(-2**31, 2**31 - 1), min_size=6, max_size=6)), min_size=1, max_size=40))
def test_integer_rows_read_as_python_reads_each_cell(width, raw):
    rows = [f"{k / 1000:.6f},{k}," + ",".join(str(v) for v in values[:width]) for k, values in raw]
    want = _plain_rows(rows, width)
    assert want is not None
    for got in (_whole_rows(rows, width), check_rows(rows, width)):
        assert got is not None
        assert got[0].tolist() == want[0] and got[1].tolist() == want[1] and got[2].tolist() == want[2]
        assert got[2].flags.c_contiguous and got[2].dtype == np.int64


@pytest.mark.parametrize("cell", ["12.0", "1e3", "nan", " 7", "+7", "-0", "2147483648", "-2147483649",
                                  "99999999999999999999", "", "0x10", "1_000", "7 7", "\u0663"])
def test_a_cell_the_integer_way_refuses_is_decided_the_float_way(cell):
    # Where the quick way gives an answer it equals the float way's; elsewhere the float way decides alone.
    rows = ["0.1,0,5,6", f"0.2,1,{cell},8", "0.3,2,9,10"]
    quick = _whole_rows(rows, 2)
    try:
        slow = _float_rows(rows, 2)
    except ValueError:
        slow = None
        with pytest.raises(ValueError):
            check_rows(rows, 2)
    if quick is not None:
        assert slow is not None
        for a, b in zip(quick, slow, strict=True):
            assert a.tolist() == b.tolist()
    if slow is not None:
        assert [a.tolist() for a in check_rows(rows, 2)] == [b.tolist() for b in slow]
    plain = _plain_rows(rows, 2)  # Python agrees wherever it reads the cell as a whole number
    if plain is not None and slow is not None:
        assert slow[2].tolist() == plain[2]


@pytest.mark.parametrize("rows", [["0.1,0,5", "0.2,1,6,7"], ["0.1,0,5,6,7", "0.2,1,6,7"], ["0.1", "0.2"],
                                  ["inf,0,5,6"], [",0,5,6"], ["0.1, ", "0.2, "], ["0.1,0,5,6", "0.2,\t"]])
def test_rows_of_another_width_or_a_bad_time_are_refused_both_ways(rows):
    assert _whole_rows(rows, 2) is None
    with pytest.raises(ValueError):
        check_rows(rows, 2)


def _recording(body_rows: list[str]) -> str:
    return FORMAT_LINE + "\n# first_index=0\nt_s,seq,a,b\n" + "\n".join(body_rows) + "\n"


def test_mark_rows_among_data_rows_make_one_block_of_the_same_frames(tmp_path):
    data = [f"{k / 100:.6f},{k},{1000 + k},{2000 - k}" for k in range(300)]
    mixed: list[str] = []
    for k, row in enumerate(data):
        mixed.append(row)
        if k % 40 == 39:
            mixed += [f"# mark t_s={k / 100:.6f} kind=touch-start channel=a", ""]
    (tmp_path / "mixed.csv").write_text(_recording(mixed))
    (tmp_path / "plain.csv").write_text(_recording(data))
    got, want = read_recording(tmp_path / "mixed.csv"), read_recording(tmp_path / "plain.csv")
    assert len(got.blocks) == 1  # the mark rows no longer cut the frames into blocks
    for name in ("t_s", "seq", "readings"):
        assert np.concatenate([getattr(b, name) for b in got.blocks]).tolist() == \
            np.concatenate([getattr(b, name) for b in want.blocks]).tolist()
    assert [m.t_s for m in got.marks] == [k / 100 for k in range(39, 300, 40)]


@pytest.mark.parametrize(("bad_data", "bad_mark", "names_line"), [
    (5, 9, 9), (9, 5, 9),  # the first damage in file order is named (line numbers of the file below)
    (None, 6, 10), (7, None, 11)])
def test_the_first_damage_in_file_order_is_named_among_marks(bad_data, bad_mark, names_line):
    rows = [f"0.{k:02d},{k},1,2" for k in range(12)]
    if bad_data is not None:
        rows[bad_data] = "0.5,x,1,2"
    if bad_mark is not None:
        rows[bad_mark] = "# mark t_s=soon kind=note"
    rows.insert(8, "# mark t_s=0.1 kind=note")
    # parse_recording_text reads in one pass (a file's marks are read first by a pass of their own)
    with pytest.raises(UserError) as info:
        parse_recording_text(_recording(rows), "rec")
    assert str(info.value).startswith(f"rec:{names_line}:"), str(info.value)


def _plain_noise_windows(deltas: np.ndarray, states: np.ndarray, guard: int, window: int) -> list[list[int]]:
    """Per key, the newest `window` deltas of frames clear of any key's activity by `guard` on both sides,
    decided once the `guard` frames after them have arrived (a plain loop, a deque as the window)."""
    n, channels = states.shape
    busy = (states != RELEASED).any(axis=1)
    rings = [deque(maxlen=window) for _ in range(channels)]
    for i in range(n - guard):
        if not busy[max(0, i - guard):i + guard + 1].any():
            for c in range(channels):
                rings[c].append(int(deltas[i, c]))
    return [list(r) for r in rings]


@settings(max_examples=40, deadline=None)
@given(st.data())
def test_shared_settle_mask_matches_the_plain_rule_for_any_blocks(data):
    channels = data.draw(st.integers(2, 5))
    n = data.draw(st.integers(1, 600))
    guard = data.draw(st.integers(0, 12))
    touch = st.tuples(st.integers(0, channels - 1), st.integers(0, n), st.integers(1, 60))
    touches = data.draw(st.lists(touch, max_size=6))
    cuts = sorted(data.draw(st.lists(st.integers(1, max(1, n - 1)), max_size=8)))
    states = np.full((n, channels), RELEASED, np.int8)
    for c, start, length in touches:
        states[start:start + length, c] = TOUCHED
    deltas = np.random.default_rng(n).integers(-50, 50, (n, channels))
    m = Measures(channels, rate_hz=100.0, window_s=0.5, settle_s=guard / 100.0)
    for a, b in zip([0, *cuts], [*cuts, n], strict=True):
        if b > a:
            m.ingest(np.arange(a, b) / 100.0, 1000 + deltas[a:b], deltas[a:b], states[a:b])
    want = _plain_noise_windows(deltas, states, m.guard_frames, m.window_frames)
    assert [m.released_deltas(c).tolist() for c in range(channels)] == want


def _walk(marks: list[Mark], name: str, t: float, tolerance_s: float) -> bool:
    """`DetectionRun._expected` as it was: a walk through the marks sorted by time, for each touch."""
    opened = None
    for m in sorted(marks, key=lambda m: m.t_s):
        if m.kind == "touch-start" and m.channel == name:
            opened = m.t_s
        elif m.kind == "touch-end" and m.channel == name and opened is not None:
            if opened - tolerance_s <= t <= m.t_s:
                return True
            opened = None
        elif m.kind == "note" and abs(m.t_s - t) <= tolerance_s:
            return True
    return False


@settings(max_examples=100, deadline=None)
@given(st.lists(st.tuples(st.sampled_from(["touch-start", "touch-end", "note", "quiet-start"]),
                          st.sampled_from(["a", "b", None]), st.integers(0, 40)), max_size=25),
       st.lists(st.tuples(st.sampled_from(["a", "b"]), st.integers(-5, 45)), min_size=1, max_size=10))
def test_marks_sorted_once_judge_touches_as_the_walk_did(raw_marks, touches):
    marks = [Mark(t / 4, kind, channel) for kind, channel, t in raw_marks]
    index = MarkIndex(marks, 1.0)
    assert index.judges == any(m.kind == "touch-start" for m in marks)
    for name, t in touches:
        assert index.expected(name, t / 4) == _walk(marks, name, t / 4, 1.0)


def test_a_command_word_imports_only_its_command():
    code = ("import sys, tui.cli\n"
            "p = tui.cli.build_parser('replay')\n"
            "a = p.parse_args(['replay', 'f.csv', '--json', '--every', '2'])\n"
            "print(a.command, a.file, a.json, a.every, 'tui.commands.check' in sys.modules)\n"
            "b = tui.cli.build_parser().parse_args(['replay', 'f.csv', '--json', '--every', '2'])\n"
            "print(sorted(vars(a)) == sorted(vars(b)) and a.func is b.func)\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, cwd=ROOT)
    assert out.returncode == 0, out.stderr
    assert out.stdout.split("\n")[:2] == ["replay f.csv True 2.0 False", "True"]
