"""What a hostile-input case is, and how one is run and judged (shared by every hostile corpus).

A case builds its input files in an empty folder and returns the padtune command line to run there. The
command runs as a user would run it (a subprocess, `python -m tui.cli`), and it must: exit 2 (or the
case's own code), write exactly one line on stderr starting `padtune:`, print no control characters and no
Python internals, finish within the time bound (CPU seconds of its process; a hang is caught by the wall
clock), create none of the outputs it names and leave every file
it names byte for byte as it was.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

# The words of a leaked Python internal: a traceback, an exception's class name, a bare KeyError.
LEAKS = ("Traceback", "Error:", "Exception", "set_int_max_str_digits", "Exceeds the limit", "[Errno",
         "KeyError", "<class", "object at 0x")


@dataclass(frozen=True)
class HostileCase:
    """One hostile input: `build(folder)` writes its files and returns padtune's arguments."""

    name: str
    build: Callable[[Path], list[str]]
    expect_exit: int = 2
    # Paths (relative to the folder) that must not exist after the run.
    must_not_exist: tuple[str, ...] = ()
    # Paths (relative to the folder) whose bytes must be the same after the run as before.
    unchanged: tuple[str, ...] = ()
    # Text that must appear on stderr (a size, a key's escaped name, ...).
    says: tuple[str, ...] = ()
    time_bound_s: float = 2.0
    stdin: bytes | None = None
    extra_env: dict[str, str] = field(default_factory=dict)


@dataclass(frozen=True)
class CaseResult:
    name: str
    ok: bool
    seconds: float
    exit_code: int | None
    stderr: str
    why: str  # empty when ok
    cpu_s: float = 0.0  # user + system time of padtune's process


def _snapshot(folder: Path, names: tuple[str, ...]) -> dict[str, bytes | None]:
    shot: dict[str, bytes | None] = {}
    for name in names:
        path = folder / name
        # Only regular files are read: a FIFO or a device is compared by its kind, not its contents.
        shot[name] = path.read_bytes() if path.is_file() else (b"<special>" if path.exists() else None)
    return shot


# A case is judged on the CPU its process used (user + system, from wait4), which a loaded machine does
# not inflate; wall time only catches a hang, with room for a busy machine's waiting.
WALL_SLACK_S = 8.0


def _run(argv: list[str], folder: Path, env: dict[str, str], stdin: bytes | None,
         timeout_s: float) -> tuple[int | None, bytes, float, float]:
    """Runs padtune; (exit code or None when killed as hung, stderr, wall seconds, CPU seconds)."""
    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err, tempfile.TemporaryFile() as inp:
        inp.write(stdin or b"")
        inp.seek(0)
        start = time.perf_counter()
        proc = subprocess.Popen([sys.executable, "-m", "tui.cli", *argv], cwd=folder, env=env,
                                stdin=inp if stdin is not None else subprocess.DEVNULL, stdout=out,
                                stderr=err)
        code: int | None = None
        while True:
            pid, status, usage = os.wait4(proc.pid, os.WNOHANG)
            if pid:
                code = os.waitstatus_to_exitcode(status)
                proc.returncode = code  # reaped here: Popen must not wait for it again
                break
            if time.perf_counter() - start > timeout_s:
                proc.kill()
                _, _, usage = os.wait4(proc.pid, 0)
                proc.returncode = -9
                break
            time.sleep(0.01)
        wall_s = time.perf_counter() - start
        err.seek(0)
        return code, err.read(), wall_s, usage.ru_utime + usage.ru_stime


def run_case(case: HostileCase, folder: Path) -> CaseResult:
    """Builds the case in `folder` (empty), runs padtune there and judges what it did."""
    argv = case.build(folder)
    before = _snapshot(folder, case.unchanged)
    env = {**os.environ, "PYTHONPATH": str(ROOT), "NO_COLOR": "1", **case.extra_env}
    code, err, wall_s, cpu_s = _run(argv, folder, env, case.stdin, case.time_bound_s + WALL_SLACK_S)
    stderr = err.decode("utf-8", "replace")
    if code is None:
        return CaseResult(case.name, False, wall_s, None, stderr, "hung (killed)", cpu_s)
    why = _judge(case, folder, before, code, stderr, cpu_s)
    return CaseResult(case.name, not why, wall_s, code, stderr, why, cpu_s)


def _judge(case: HostileCase, folder: Path, before: dict[str, bytes | None], code: int, stderr: str,
           cpu_s: float) -> str:
    lines = stderr.splitlines()
    if code != case.expect_exit:
        return f"exit {code}, expected {case.expect_exit}"
    if case.expect_exit == 2 and (len(lines) != 1 or not lines[0].startswith("padtune:")):
        return f"stderr is {len(lines)} lines, expected one 'padtune:' line"
    if any(not line.isprintable() for line in lines):
        return "stderr holds control characters"
    leak = next((word for word in LEAKS if word in stderr), None)
    if leak is not None:
        return f"stderr leaks Python internals ({leak!r})"
    missing = [text for text in case.says if text not in stderr]
    if missing:
        return f"stderr does not say {missing[0]!r}"
    if cpu_s > case.time_bound_s:
        return f"used {cpu_s:.2f} s of CPU (bound {case.time_bound_s:.1f} s)"
    made = [name for name in case.must_not_exist if os.path.lexists(folder / name)]
    if made:
        return f"wrote {made[0]}"
    after = _snapshot(folder, case.unchanged)
    changed = [name for name in case.unchanged if after[name] != before[name]]
    if changed:
        return f"changed {changed[0]}"
    return ""
