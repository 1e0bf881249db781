"""The event log: touches, releases, board notes, link faults and profile saves, newest at the bottom."""

from __future__ import annotations

from rich.text import Text
from textual.widgets import RichLog


class EventLog(RichLog):
    """A bounded log; `add()` takes a time and an already-styled line."""

    def __init__(self, *, id: str | None = None, max_lines: int = 400) -> None:
        super().__init__(id=id, max_lines=max_lines, wrap=False, markup=False, highlight=False)
        self.can_focus = False

    def add(self, t_s: float, line: Text | str) -> None:
        text = Text(f"{t_s:8.2f} ", style="dim", no_wrap=True)
        text.append_text(line if isinstance(line, Text) else Text(line))
        self.write(text)
