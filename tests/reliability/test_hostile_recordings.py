"""Every hostile recording and raw capture (tests/reliability/hostile_recordings.py) through padtune as a
subprocess, each in its own empty folder, judged by `cases.run_case`: one `padtune:` line and exit 2 (or
the case's own code), no control characters, no Python internals, within the bound, no output written,
the input unchanged.

Each case failed before the streaming reader of issue 13 and its one-line messages, or guards a path that
already held (the lone CR, FIFOs): `guards()` says which defect each one guards.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from tests.reliability import hostile_recordings
from tests.reliability.cases import ROOT, run_case

CASES = {case.name: case for case in hostile_recordings.cases()}
GUARDS = hostile_recordings.guards()

def _param(name: str) -> object:
    return pytest.param(name, marks=[pytest.mark.e2e], id=name)


def test_the_corpus_has_40_kinds_or_more_each_named_and_explained() -> None:
    names = [case.name for case in hostile_recordings.cases()]
    assert len(names) >= 40
    assert len(set(names)) == len(names)
    assert set(GUARDS) == set(names)
    assert all(len(why) > 20 for why in GUARDS.values())


@pytest.mark.parametrize("name", [_param(name) for name in CASES])
def test_hostile_recording(name: str, tmp_path: Path) -> None:
    result = run_case(CASES[name], tmp_path)
    assert result.ok, (f"{name} guards: {GUARDS[name]}\n{result.why} (exit {result.exit_code}, "
                       f"{result.seconds:.2f} s); stderr: {result.stderr[-600:]!r}")


# The judge reads stderr only; replay's lines on stdout quote the board too (its info line's board name
# and key names, its notes, a fault's detail). They must reach a terminal escaped as well.
def _stdout_inputs() -> dict[str, bytes]:
    info = ("# info t_s=0.000000 proto=1 board=pa%1B[2Jnel channels=4 rate=100 "
            "names=zo%0Ane1,%1B[31mred,zone3,zone4%00 polarity=+")
    head = hostile_recordings.head_lines()
    rows = ["# note t_s=1.000000 text=\x1b[2Jwiped \x07", "# fault t_s=1.000000 kind=garbled count=1 "
            "text=\x1b]0;title\x07"]
    capture = hostile_recordings.capture_lines(frames=300)
    capture.insert(50, "# \x1b[2J a board comment holding ESC")
    return {"info_row": hostile_recordings.recording(head=[*head[:3], info, *head[4:]]).encode(),
            "note_and_fault_rows": hostile_recordings.recording(extra=rows).encode(),
            "capture_comment": hostile_recordings.capture(capture)}


@pytest.mark.e2e
@pytest.mark.parametrize("which", sorted(_stdout_inputs()))
def test_replay_prints_no_control_characters_on_stdout(which: str, tmp_path: Path) -> None:
    path = tmp_path / "input.csv"
    path.write_bytes(_stdout_inputs()[which])
    done = subprocess.run([sys.executable, "-m", "tui.cli", "replay", path.name], cwd=tmp_path,
                          capture_output=True, timeout=60,
                          env={**os.environ, "PYTHONPATH": str(ROOT), "NO_COLOR": "1"})
    assert done.returncode == 0, done.stderr.decode("utf-8", "replace")
    bad = [line for line in done.stdout.decode("utf-8", "replace").split("\n") if not line.isprintable()]
    assert not bad, f"control characters reach the terminal: {bad[:3]!r}"
