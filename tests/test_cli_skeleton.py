"""The command line exists, is discoverable, and answers --help as a subprocess."""

import subprocess
import sys


def test_help_runs_as_subprocess():
    out = subprocess.run(
        [sys.executable, "-m", "tui.cli", "--help"], capture_output=True, text=True, timeout=60
    )
    assert out.returncode == 0
    assert "usage: padtune" in out.stdout


def test_usage_mistakes_are_one_line_exit_2_and_point_at_help():
    for args in (["nosuchcommand"], ["monitor"], ["estimate", "--pad-mm", "-12x-12"]):
        out = subprocess.run(
            [sys.executable, "-m", "tui.cli", *args], capture_output=True, text=True, timeout=60
        )
        assert out.returncode == 2, args
        assert out.stderr.count("\n") == 1, out.stderr
        assert "--help" in out.stderr and "Traceback" not in out.stderr
