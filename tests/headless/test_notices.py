"""NoticeGate (tui.headless.notices): repeated notices collapse to one line per second per kind, with
their count; nothing is lost (the counts add up) and different notices never hide each other."""

from __future__ import annotations

import re

from hypothesis import given
from hypothesis import strategies as st

from tui.headless.notices import NoticeGate

RESET = "board reset: baselines taken again"


def counted(lines: list[str], text: str) -> int:
    """How many notices `lines` stand for: a plain line is one, a summary says `(xN in T s)`."""
    total = 0
    for line in lines:
        if not line.startswith(text):
            continue
        m = re.search(r"\(x(\d+) in \d+\.\d s\)$", line)
        total += int(m.group(1)) if m else 1
    return total


def test_a_flood_is_one_line_then_one_summary_a_second():
    gate = NoticeGate()
    lines = []
    for i in range(5000):  # 5000 resets over 2.5 s
        lines += gate.add(RESET, i * 0.0005)
    lines += gate.flush()
    assert lines[0] == RESET
    assert lines[1] == f"{RESET} (x1999 in 1.0 s)"  # the repeats of the first second, at 1.0 s
    assert len(lines) == 4 and counted(lines, RESET) == 5000


def test_a_notice_after_a_quiet_second_is_shown_plainly():
    gate = NoticeGate()
    assert gate.add(RESET, 0.0) == [RESET]
    assert gate.add(RESET, 1.5) == [RESET]
    assert gate.add("board now has 3 channels (was 2)", 1.6) == ["board now has 3 channels (was 2)"]


def test_held_repeats_come_out_when_due_without_a_new_notice():
    gate = NoticeGate()
    gate.add(RESET, 0.0)
    gate.add(RESET, 0.2)
    gate.add(RESET, 0.4)
    assert gate.due(0.9) == []
    assert gate.due(1.0) == [f"{RESET} (x2 in 1.0 s)"]  # counted over the second since the line
    assert gate.due(5.0) == [] and gate.flush() == []


def test_kinds_are_gated_apart_and_a_kind_keeps_its_latest_text():
    gate = NoticeGate()
    out = gate.add("silent for 2 s", 0.0, kind="silent")
    out += gate.add(RESET, 0.1)
    out += gate.add("silent for 4 s", 0.5, kind="silent")
    out += gate.flush()
    assert out == ["silent for 2 s", RESET, "silent for 4 s (x1 in 0.5 s)"]


@given(st.lists(st.tuples(st.sampled_from(["a", "b", "c"]), st.floats(0, 0.3)), max_size=300))
def test_counts_add_up_and_lines_are_bounded(notices):
    """For any stream: every notice is accounted for, and each kind shows at most one line per second
    (plus its first line and the final flush)."""
    gate = NoticeGate()
    t, lines, times = 0.0, [], []
    for text, step in notices:
        t += step
        new = gate.add(text, t)
        lines += new
        times += [t] * len(new)
    lines += gate.flush()
    for text in "abc":
        assert counted(lines, text) == sum(1 for n, _ in notices if n == text)
        mine = [tt for line, tt in zip(lines, times, strict=False) if line.startswith(text)]
        assert len(mine) <= 1 + int(t) + 1
