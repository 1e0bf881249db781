"""The event log: touches, releases, board notes, link faults and profile saves, newest at the bottom."""

from __future__ import annotations

from collections import deque

from rich.console import RenderableType
from rich.table import Table
from rich.text import Text
from textual.events import Resize
from textual.widgets import RichLog

TIME_CELLS = 9  # "%8.2f " before every line; a long line goes on below it, indented as far


class EventLog(RichLog):
    """A bounded log; `add()` takes a time and an already-styled line.

    A line longer than the log is wide goes on in the next lines, indented past the time, so a link
    fault's reason or a file name is read whole even at 80 columns. The log keeps its entries and lays
    them out again whenever its width changes: lines added while it was hidden (the detail panel takes
    its place) or narrow are wrapped to the width it has when it shows again.
    """

    def __init__(self, *, id: str | None = None, max_lines: int = 400) -> None:
        super().__init__(id=id, max_lines=max_lines, wrap=False, markup=False, highlight=False,
                         min_width=20)  # (its default, 78, would lay wrapped lines out 78 wide)
        self.can_focus = False
        self._entries: deque[tuple[float, Text]] = deque(maxlen=max_lines)
        self._laid_out_cells = -1  # the width the shown lines were laid out at (none yet)
        self._behind = False  # entries were added that are not laid out yet

    @property
    def entries(self) -> list[tuple[float, Text]]:
        """Every line kept, oldest first, as added (time in seconds, text)."""
        return list(self._entries)

    def add(self, t_s: float, line: Text | str) -> None:
        body = line if isinstance(line, Text) else Text(line)
        self._entries.append((t_s, body))
        cells = self._cells()
        if cells == self._laid_out_cells and not self._behind:
            self.write(_renderable(t_s, body, cells), width=cells)
            return
        self._behind = True  # hidden (laid out with the rest when it shows), or another width now
        self._lay_out()  # (its scroll bar came or went)

    def _cells(self) -> int:
        return self.scrollable_content_region.width  # 0 while hidden (no region on the screen)

    def on_resize(self, event: Resize) -> None:
        self._lay_out()

    def on_show(self) -> None:
        self._lay_out()  # shown again at the width it had: no resize, but lines may have come meanwhile

    def _lay_out(self) -> None:
        cells = self._cells()
        if cells <= TIME_CELLS or (cells == self._laid_out_cells and not self._behind):
            return  # hidden or too narrow to show anything (keep the entries for later), or up to date
        self._laid_out_cells, self._behind = cells, False
        self.clear()
        for t_s, body in self._entries:
            self.write(_renderable(t_s, body, cells), width=cells)


def _renderable(t_s: float, body: Text, cells: int) -> RenderableType:
    stamp = Text(f"{t_s:8.2f} ", style="dim", no_wrap=True)
    if body.cell_len <= cells - TIME_CELLS:  # the common case: one line, no table to lay out
        return Text.assemble(stamp, body, no_wrap=True)
    # Too long: time and text as two columns, so the text wraps under itself.
    grid = Table.grid()
    grid.add_column(width=TIME_CELLS, no_wrap=True)
    grid.add_column(overflow="fold")
    grid.add_row(stamp, body)
    return grid
