"""Lines of a widget handed back whole while nothing about them changed.

Textual's compositor draws a partial update by rendering every widget whose clip overlaps the changed
area, each over its whole region: when only the channel table changed (every screen frame), the screen
itself, the link strip, the edit bar, the lower panels' container and the footer are rendered again
too. Their styles cache keeps their lines, but each pass still looks up their colours and filters and
filters every line again, for the very same strips. `keep_lines(widget)` gives a widget a styles cache
that also keeps the last pass whole and hands it back while nothing it was drawn from has changed.

What a pass is drawn from: the lines (any repaint marks them dirty through `set_dirty` or `clear`, as
Textual's own line cache relies on), the crop and size, the colours under the widget, the line filters,
the opacity and the hover style (links are styled on hover). All are part of the key.
"""

from __future__ import annotations

from typing import TypeVar

from textual._styles_cache import StylesCache
from textual.geometry import Region
from textual.strip import Strip
from textual.widget import Widget

W = TypeVar("W", bound=Widget)


class KeptLinesCache(StylesCache):
    """A styles cache that keeps its last whole pass (see the module's docstring)."""

    def __init__(self) -> None:
        super().__init__()
        self._kept: tuple[tuple[object, ...], list[Strip]] | None = None

    def set_dirty(self, *regions: Region) -> None:
        self._kept = None
        super().set_dirty(*regions)

    def clear(self) -> None:
        self._kept = None
        super().clear()

    def render_widget(self, widget: Widget, crop: Region) -> list[Strip]:
        key = (crop, widget.region.size, widget.background_colors, tuple(widget.get_line_filters()),
               widget.opacity, widget.hover_style)
        kept = self._kept
        if kept is not None and kept[0] == key:
            return list(kept[1])
        strips = super().render_widget(widget, crop)
        self._kept = (key, list(strips))
        return strips


def keep_lines(widget: W) -> W:
    """Give `widget` a styles cache that keeps its last pass; returns the widget."""
    widget._styles_cache = KeptLinesCache()
    return widget
