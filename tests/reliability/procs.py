"""Running padtune as a user does (a subprocess, `python -m tui.cli`) for the reliability suite's parts."""

from __future__ import annotations

import os
import subprocess
import sys
import time
from collections.abc import Callable
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
WAIT_S = 60.0  # generous: two shared cores, several engineers' runs at once


def padtune_argv(*args: str) -> list[str]:
    return [sys.executable, "-m", "tui.cli", *args]


def padtune_env(**extra: str) -> dict[str, str]:
    return {**os.environ, "PYTHONPATH": str(ROOT), "NO_COLOR": "1", "COLUMNS": "200", **extra}


def padtune(*args: str, cwd: Path = ROOT, timeout_s: float = WAIT_S) -> subprocess.CompletedProcess[str]:
    return subprocess.run(padtune_argv(*args), cwd=cwd, env=padtune_env(), capture_output=True, text=True,
                          stdin=subprocess.DEVNULL, timeout=timeout_s)


def wait_for(condition: Callable[[], bool], timeout_s: float = WAIT_S, proc: subprocess.Popen | None = None,
             step_s: float = 0.01) -> bool:
    """Polls `condition` until it holds (True) or the deadline passes or `proc` ends (False)."""
    deadline = time.monotonic() + timeout_s
    while not condition():
        if time.monotonic() > deadline or (proc is not None and proc.poll() is not None):
            return condition()
        time.sleep(step_s)
    return True
