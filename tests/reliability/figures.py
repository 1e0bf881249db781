"""A figure of the reliability suite (`make reliability`): one measured value, its bound, and whether it
holds; the table they are printed in; and the process measurements several parts share.

Every part of the suite (`tests/reliability/part_*.py`) exposes `run(quick: bool) -> list[Figure]`. A
figure that could not be measured (a part that crashed, a corpus that is missing) is out of bounds, with
the reason as its value: a suite that cannot measure must not pass.
"""

from __future__ import annotations

import os
import threading
from dataclasses import dataclass, replace
from pathlib import Path


@dataclass(frozen=True)
class Figure:
    """`value` as measured (a number, or text when there is none), `unit`, the `bound` in words and `ok`."""

    name: str
    value: float | int | str
    unit: str
    bound: str
    ok: bool
    note: str = ""  # what went wrong (the first case, the first difference), printed below the table
    # A bound on time (a reconnect, a case's run, board time lost to a kill): held by `make reliability`;
    # `make test` shows it but does not assert it (speed is never a timed assertion in tests).
    timed: bool = False

    def shown_value(self) -> str:
        if isinstance(self.value, float):
            return f"{self.value:.3g}" if abs(self.value) < 1000 else f"{self.value:,.0f}"
        if isinstance(self.value, int) and not isinstance(self.value, bool):
            return f"{self.value:,}"
        return str(self.value)


def at_most(name: str, value: float, limit: float, unit: str = "", timed: bool = False) -> Figure:
    return Figure(name, value, unit, f"<= {limit:g}", value <= limit, timed=timed)


def at_least(name: str, value: float, limit: float, unit: str = "") -> Figure:
    return Figure(name, value, unit, f">= {limit:g}", value >= limit)


def equal(name: str, value: float | str, want: float | str, unit: str = "") -> Figure:
    return Figure(name, value, unit, f"= {want}", value == want)


def info(name: str, value: float | int | str, unit: str = "") -> Figure:
    """A figure shown for context, with no bound (always ok)."""
    return Figure(name, value, unit, "(shown)", True)


def failed(name: str, why: str) -> Figure:
    """A figure that could not be measured: out of bounds, `why` in its note."""
    return Figure(name, "not measured", "", "measured", False, note=why)


def with_note(figures: list[Figure], note: str) -> list[Figure]:
    """`figures` with `note` (what went wrong first) on the first figure out of bounds."""
    if not note:
        return figures
    at = next((k for k, f in enumerate(figures) if not f.ok), None)
    if at is None:
        return figures
    return [*figures[:at], replace(figures[at], note=note), *figures[at + 1:]]


def table(figures: list[Figure]) -> str:
    """The figures as one plain-text table (name, value, unit, bound, ok)."""
    rows = [("figure", "value", "unit", "bound", "ok")]
    rows += [(f.name, f.shown_value(), f.unit, f.bound, "ok" if f.ok else "OUT") for f in figures]
    widths = [max(len(row[i]) for row in rows) for i in range(5)]
    lines = []
    for k, row in enumerate(rows):
        cells = [row[0].ljust(widths[0]), row[1].rjust(widths[1]), row[2].ljust(widths[2]),
                 row[3].ljust(widths[3]), row[4]]
        lines.append("  ".join(cells).rstrip())
        if k == 0:
            lines.append("  ".join("-" * w for w in widths))
    notes = [f"- {f.name}: {f.note}" for f in figures if f.note]
    return "\n".join(lines + (["", "notes:", *notes] if notes else []))


# -- process measurements (Linux /proc; the suite runs where padtune's pty tests run) ------------------
def _status_kib(pid: int | str, key: str) -> int:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith(key + ":"):
            return int(line.split()[1])
    raise LookupError(f"{key} not in /proc/{pid}/status")


def rss_mib(pid: int | str = "self") -> float:
    """Resident memory now, MiB."""
    return _status_kib(pid, "VmRSS") / 1024


def peak_rss_mib(pid: int | str = "self") -> float:
    """The high-water mark of resident memory (VmHWM), MiB; `reset_peak_rss()` starts it again."""
    return _status_kib(pid, "VmHWM") / 1024


def reset_peak_rss() -> bool:
    """Start the high-water mark again from the current RSS (Linux >= 4.0: `5` to clear_refs)."""
    try:
        Path("/proc/self/clear_refs").write_text("5")
    except OSError:
        return False
    return True


def open_fds(pid: int | str = "self") -> int:
    return len(os.listdir(f"/proc/{pid}/fd"))


def os_threads(pid: int | str = "self") -> int:
    return len(os.listdir(f"/proc/{pid}/task"))


def python_threads() -> int:
    return threading.active_count()
