"""The command line exists, is discoverable, and answers --help as a subprocess."""

import subprocess
import sys


def test_help_runs_as_subprocess():
    out = subprocess.run(
        [sys.executable, "-m", "tui.cli", "--help"], capture_output=True, text=True, timeout=60
    )
    assert out.returncode == 0
    assert "usage: padtune" in out.stdout
