"""The channel table: every channel as one line, drawn by this single widget through the line API.

One widget for all rows (not one per cell) is what keeps 64 channels at 1 kHz cheap: each screen
frame builds only the visible lines, from the snapshots the screen hands over with `show()`. The table
owns its cursor keys (up/down, j/k, PgUp/PgDn, Home/End) and tells the screen which channel is
selected with a `Highlighted` message.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import ClassVar

from rich.color import Color as RichColor
from rich.segment import Segment
from rich.style import Style
from rich.text import Text
from textual.binding import Binding
from textual.css.styles import RenderStyles
from textual.filter import ANSIToTruecolor, LineFilter
from textual.geometry import Region, Size
from textual.message import Message
from textual.reactive import reactive
from textual.strip import Strip
from textual.widget import Widget

from tui.render import NULL, Piece
from tui.render.row import RowLayout, header_line, row_layout, row_pieces
from tui.render.views import ChannelView

# A Segment (a named tuple) made without the named tuple's Python-level constructor: thousands a second.
_segment = tuple.__new__

# Roles the row renderer asks for; each is a component class styled in app.tcss.
ROLES = (
    "header", "cursor", "selected", "name", "edited", "dim", "idle", "pending", "touched", "stuck",
    "good", "warn", "bad", "bar", "bar-empty", "threshold", "release", "spark",
)


def _hatched(styles: RenderStyles) -> bool:
    """As Textual decides it when drawing: `hatch` reads None, not "none", where no rule sets it."""
    return styles.has_rule("hatch") and styles.hatch not in (None, "none")


class ChannelTable(Widget):
    """All channels, one line each, a header line on top; keeps the cursor row in view."""

    COMPONENT_CLASSES: ClassVar[set[str]] = {f"channel-table--{role}" for role in ROLES}
    BINDINGS: ClassVar = [
        Binding("down,j", "cursor(1)", "Next channel", id="move.down", show=False),
        Binding("up,k", "cursor(-1)", "Previous channel", id="move.up", show=False),
        Binding("pagedown", "cursor_page(1)", "Page down", id="move.pagedown", show=False),
        Binding("pageup", "cursor_page(-1)", "Page up", id="move.pageup", show=False),
        Binding("home", "cursor_to(0)", "First channel", id="move.first", show=False),
        Binding("end", "cursor_to(-1)", "Last channel", id="move.last", show=False),
    ]
    can_focus = True

    cursor: reactive[int] = reactive(0, layout=False)

    class Highlighted(Message):
        """The selected channel changed (a key moved the cursor, or the rows changed under it)."""

        def __init__(self, table: ChannelTable, channel: int) -> None:
            super().__init__()
            self.table, self.channel = table, channel

        @property
        def control(self) -> ChannelTable:
            return self.table

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self._views: Sequence[ChannelView] = ()
        self._top = 0
        self._styles: dict[str, Style] | None = None
        self._layout: RowLayout | None = None
        self._combined: dict[Style, dict[str, Style]] = {}
        self._pass_size: Size | None = None
        self._header_strip: tuple[tuple[object, ...], Strip] | None = None
        # The app's ANSI-to-truecolour filter when this table applies it itself (see get_line_filters),
        # and the background it converts on.
        self._truecolor: tuple[ANSIToTruecolor, RichColor] | None = None

    # -- data in ----------------------------------------------------------------------------------
    def show(self, views: Sequence[ChannelView]) -> None:
        """Replace the rows (called by the app's screen timer) and redraw what changed."""
        if len(views) != len(self._views):
            self._views = views
            self.refresh(layout=True)  # the table's height follows its row count
        elif list(views) == list(self._views):
            return  # nothing new (a silent board, a slow one between frames): no redraw at all
        self._views = views
        self.cursor = self.validate_cursor(self.cursor)
        self._scroll_to_cursor()
        self.refresh()

    @property
    def rows(self) -> int:
        return len(self._views)

    def validate_cursor(self, cursor: int) -> int:
        return max(0, min(cursor, len(self._views) - 1)) if self._views else 0

    def watch_cursor(self, cursor: int) -> None:
        self._scroll_to_cursor()
        self.refresh()
        self.post_message(self.Highlighted(self, cursor))

    # -- keys -------------------------------------------------------------------------------------
    def action_cursor(self, rows: int) -> None:
        self.cursor = self.validate_cursor(self.cursor + rows)

    def action_cursor_page(self, pages: int) -> None:
        self.action_cursor(pages * self.page_rows)

    def action_cursor_to(self, row: int) -> None:
        self.cursor = self.validate_cursor(row if row >= 0 else self.rows - 1)

    def _scroll_to_cursor(self) -> None:
        visible = max(1, self.size.height - 1)
        if self.cursor < self._top:
            self._top = self.cursor
        elif self.cursor >= self._top + visible:
            self._top = self.cursor - visible + 1
        self._top = max(0, min(self._top, max(0, len(self._views) - visible)))

    @property
    def page_rows(self) -> int:
        return max(1, self.size.height - 2)

    def get_content_height(self, container: Size, viewport: Size, width: int) -> int:
        """One line per channel plus the header, so the table takes only the room it needs."""
        return len(self._views) + 1 if self._views else 2

    # -- drawing ----------------------------------------------------------------------------------
    def notify_style_update(self) -> None:
        super().notify_style_update()
        self._styles = None
        self._combined = {}
        self._header_strip = None

    def on_resize(self) -> None:
        self._layout = None
        self._scroll_to_cursor()

    def styles_map(self) -> dict[str, Style]:
        if self._styles is None:
            self._styles = {
                role: self.get_component_rich_style(f"channel-table--{role}", partial=True)
                for role in ROLES
            }
            self._styles["base"] = self.rich_style
        return self._styles

    def _row_layout(self, width: int) -> RowLayout:
        if self._layout is None or self._layout.width != width:
            longest = max((len(v.name) for v in self._views), default=6)
            self._layout = row_layout(width, name_width=max(6, longest))
        return self._layout

    def get_line_filters(self) -> Sequence[LineFilter]:
        """The app's filters, less its ANSI-to-truecolour one when the rows can take it themselves.

        That filter makes a new segment for every segment of every line drawn, though it maps a
        handful of styles: the table converts its few styles once (`_on_base`, kept until the styles,
        the theme or the background change) and makes its segments in their final styles. Only where a
        line reaches the filter as the table drew it (no opacity, tint, text opacity, hatch or padding
        on the table, which would change the styles in between); otherwise Textual filters as usual.
        """
        filters = super().get_line_filters()
        found = next((f for f in filters if isinstance(f, ANSIToTruecolor)), None)
        styles = self.styles
        if (found is None or self.opacity != 1.0 or styles.tint.a or styles.text_opacity != 1.0
                or _hatched(styles) or styles.padding.left or styles.padding.right):
            self._own_truecolor(None)
            return filters
        self._own_truecolor((found, self.background_colors[1].rich_color))
        return [f for f in filters if f is not found]

    def _own_truecolor(self, truecolor: tuple[ANSIToTruecolor, RichColor] | None) -> None:
        if truecolor != self._truecolor:  # another theme, background or filter: convert afresh
            self._truecolor = truecolor
            self._combined = {}
            self._header_strip = None
            # Lines Textual kept from the passes before were drawn for the other way: draw them again.
            self._styles_cache.clear()

    def _final(self, style: Style) -> Style:
        """A style as it will reach the terminal (the app's truecolour filter, when the table applies it)."""
        if self._truecolor is None:
            return style
        found, background = self._truecolor
        return found.truecolor_style(style, background)

    def render_lines(self, crop: Region) -> list[Strip]:
        """Textual's pass over the dirty lines: the size is looked up once for all of them, not per line."""
        self._pass_size = self.size
        try:
            if self._plain_box():
                return self._render_plain(crop)
            return super().render_lines(crop)
        finally:
            self._pass_size = None

    def _plain_box(self) -> bool:
        """True when Textual's styling would hand the table's lines through unchanged: no border,
        outline, padding, scrollbar gutter, tint, opacity, text opacity or hatch (the table's own CSS)."""
        styles = self.styles
        return (not any(edge for edge, _ in styles.border) and not any(edge for edge, _ in styles.outline)
                and not any(styles.padding) and self.opacity == 1.0 and not styles.tint.a
                and styles.text_opacity == 1.0 and not _hatched(styles)
                and self.content_region.size == self.region.size)

    def _render_plain(self, crop: Region) -> list[Strip]:
        """What `StylesCache.render_widget` does for a plain box, without its per-line styling work.

        Every visible row changes at every screen frame, so that work (borders, padding, outline,
        tint and opacity looked up and a new strip made per line, then thrown away) was a third of
        drawing the table. The lines are kept in the widget's own styles cache, so Textual's marking
        of dirty lines (refresh, resize, style changes) works exactly as for any widget.
        """
        cache = self._styles_cache
        filters = self.get_line_filters()  # first: it may drop the lines kept (see _own_truecolor)
        background = self.background_colors[1]
        width = self._pass_size.width if self._pass_size is not None else self.size.width
        if width != cache._width:
            cache.clear()
            cache._width = width
        kept, dirty = cache._cache, cache._dirty_lines
        render_line = self.render_line
        strips = []
        for y in crop.line_range:
            strip = kept.get(y)
            if strip is None or y in dirty:
                strip = kept[y] = render_line(y).adjust_cell_length(width)
            for line_filter in filters:
                strip = strip.apply_filter(line_filter, background)
            strips.append(strip)
        dirty.difference_update(crop.line_range)
        if crop.column_span != (0, width):
            x1, x2 = crop.column_span
            strips = [strip.crop(x1, x2) for strip in strips]
        return strips

    def render_line(self, y: int) -> Strip:
        size = self._pass_size or self.size
        width = size.width
        styles = self.styles_map()
        base = styles["base"]
        layout = self._row_layout(width - 1)
        if y == 0:
            return self._header(layout, width, size.height, styles)
        index = self._top + y - 1
        if index >= len(self._views):
            return Strip.blank(width, self._final(base))
        selected = index == self.cursor
        if selected:
            base = base + styles["selected"]
        on_base = self._on_base(base)
        pieces = row_pieces(self._views[index], layout, selected, on_base)
        return self._strip(pieces, on_base[""], width)

    def _header(self, layout: RowLayout, width: int, height: int, styles: dict[str, Style]) -> Strip:
        """The header line, built again only when what it shows changes (not at every frame)."""
        rows = len(self._views)
        overflow = rows > height - 1
        more_up, more_down = overflow and self._top > 0, overflow and self._top + height - 1 < rows
        key = (layout, width, overflow, more_up, more_down)
        if self._header_strip is not None and self._header_strip[0] == key:
            return self._header_strip[1]
        text = header_line(layout, styles)
        if overflow:
            # More rows than fit: say so in the cursor column; the edit bar shows "n/N".
            text = Text("↕" if more_up and more_down else "↑" if more_up else "↓", styles["dim"]) + text[1:]
        text.truncate(width, pad=True)
        strip = Strip(text.render(self.app.console), width).apply_style(styles["base"])
        if self._truecolor is not None:
            strip = Strip([Segment(chunk, None if style is None else self._final(style), control)
                           for chunk, style, control in strip], strip.cell_length)
        self._header_strip = (key, strip)
        return strip

    def _on_base(self, base: Style) -> dict[str, Style]:
        """Every role's style already on the row's base (one map per base, kept until the styles change),
        as it reaches the terminal: the pieces come out in their final styles; "" is the base itself,
        which plain pieces (NULL) take."""
        found = self._combined.get(base)
        if found is None:
            final = self._final
            found = {role: final(base + style) for role, style in self.styles_map().items()}
            found[""] = final(base)
            self._combined[base] = found
        return found

    def _strip(self, pieces: list[Piece], base: Style, width: int) -> Strip:
        """Segments straight from the pieces (single-cell characters, styles on the base already).

        Far cheaper than building a Text and rendering it, and this runs for every visible row on
        every screen frame.
        """
        segments = [_segment(Segment, (chunk, base if style is NULL else style, None))
                    for chunk, style in pieces]
        cells = sum([len(chunk) for chunk, _ in pieces])
        if cells < width:
            segments.append(_segment(Segment, (" " * (width - cells), base, None)))
            cells = width
        strip = Strip(segments, cells)
        return strip if cells == width else strip.crop(0, width)
