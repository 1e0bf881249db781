"""The screen's commands as a user runs them: mistakes are one line on stderr and exit 2, help works."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest


def padtune(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "tui.cli", *args], capture_output=True, text=True,
                          timeout=60)


@pytest.mark.parametrize("command", ["demo", "watch"])
def test_help(command: str) -> None:
    out = padtune(command, "--help")
    assert out.returncode == 0 and "--profile" in out.stdout and "--baud" in out.stdout


@pytest.mark.parametrize(("args", "says"), [
    (["watch", "/dev/padtune-no-such-port"], "not found"),
    (["watch", "sim://no-such-board"], "unknown board"),
    (["watch", "sim://greenhouse", "--baud", "0"], "baud rate"),
    (["demo", "--profile", "/nonexistent/keys.toml"], "no profile file"),
    (["demo", "--board", "no-such-board"], "unknown board"),
])
def test_mistakes_are_one_line_and_exit_2(args: list[str], says: str) -> None:
    out = padtune(*args)
    assert out.returncode == 2
    assert says in out.stderr
    assert len(out.stderr.strip().splitlines()) == 1 and "Traceback" not in out.stderr


def test_a_broken_profile_is_refused_before_the_screen_opens(tmp_path: Path) -> None:
    bad = tmp_path / "keys.toml"
    bad.write_text("[defaults]\nthreshold_counts = 10\nhysteresis_counts = 20\n")
    out = padtune("demo", "--profile", str(bad))
    assert out.returncode == 2 and "hysteresis" in out.stderr and "Traceback" not in out.stderr
