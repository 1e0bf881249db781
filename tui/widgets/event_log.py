"""The event log: touches, releases, board notes, link faults and profile saves, newest at the bottom."""

from __future__ import annotations

from rich.table import Table
from rich.text import Text
from textual.widgets import RichLog

TIME_CELLS = 9  # "%8.2f " before every line; a long line goes on below it, indented as far


class EventLog(RichLog):
    """A bounded log; `add()` takes a time and an already-styled line.

    A line longer than the log is wide goes on in the next lines, indented past the time, so a link
    fault's reason or a file name is read whole even at 80 columns.
    """

    def __init__(self, *, id: str | None = None, max_lines: int = 400) -> None:
        super().__init__(id=id, max_lines=max_lines, wrap=False, markup=False, highlight=False,
                         min_width=20)  # (its default, 78, would lay wrapped lines out 78 wide)
        self.can_focus = False

    def add(self, t_s: float, line: Text | str) -> None:
        body = line if isinstance(line, Text) else Text(line)
        stamp = Text(f"{t_s:8.2f} ", style="dim", no_wrap=True)
        room = self.scrollable_content_region.width - TIME_CELLS
        if room > 0 and body.cell_len <= room:  # the common case: one line, no table to lay out
            self.write(stamp.append_text(body))
            return
        # Too long, or the width is not known yet (RichLog lays this out once it is): time and text
        # as two columns, so the text wraps under itself.
        grid = Table.grid()
        grid.add_column(width=TIME_CELLS, no_wrap=True)
        grid.add_column(overflow="fold")
        grid.add_row(stamp, body)
        self.write(grid)
