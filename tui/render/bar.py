"""The delta bar: how far a channel's delta is from its threshold and its release level, in cells.

The fill uses eighth blocks; the threshold is always a `┃` and the release level (threshold minus
hysteresis) a `╎`, so both stay visible with or without colour, filled or not.
"""

from __future__ import annotations

from rich.style import Style
from rich.text import Text

from tui.render import NULL, Piece, Styles, to_text
from tui.render.memo import PiecesMemo

_EIGHTHS = " ▏▎▍▌▋▊▉█"
THRESHOLD_MARK = "┃"
RELEASE_MARK = "╎"
_KEPT = PiecesMemo()

# The threshold sits at this fraction of the bar so a touch well above it still has room to show.
THRESHOLD_AT = 0.6


def bar_scale_counts(threshold_counts: int, width: int) -> float:
    """Counts per cell for a bar of `width` cells that puts the threshold at THRESHOLD_AT."""
    return max(1.0, float(threshold_counts)) / max(1.0, THRESHOLD_AT * width)


def delta_bar(
    delta_counts: float,
    threshold_counts: int,
    release_counts: int,
    width: int,
    styles: Styles,
    role: str = "bar",
) -> Text:
    """A bar `width` cells wide. A negative delta (away from touch) shows as `◂` in the first cell."""
    return to_text(bar_pieces(delta_counts, threshold_counts, release_counts, width, styles, role))


def bar_pieces(delta_counts: float, threshold_counts: int, release_counts: int, width: int, styles: Styles,
               role: str = "bar") -> list[Piece]:
    """The bar as pieces (kept by their inputs: a released key's delta wanders over a few counts)."""
    key = (delta_counts, threshold_counts, release_counts, width, role, id(styles))
    found = _KEPT.get(key, styles)
    if found is None:
        found = _KEPT.put(key, styles, _bar_pieces(delta_counts, threshold_counts, release_counts, width,
                                                   styles, role))
    return found


def _bar_pieces(delta_counts: float, threshold_counts: int, release_counts: int, width: int, styles: Styles,
                role: str) -> list[Piece]:
    text: list[Piece] = []
    if width <= 0:
        return text
    per_cell = bar_scale_counts(threshold_counts, width)
    t_cell = min(width - 1, round(threshold_counts / per_cell))
    r_cell = min(width - 1, max(0, round(release_counts / per_cell)))
    eighths = int(max(0.0, delta_counts) / per_cell * 8)
    fill_style = styles.get(role, NULL)
    empty_style = styles.get("bar-empty", NULL)
    full_cells, part = divmod(eighths, 8)
    if full_cells < width:
        cells = "█" * full_cells + (_EIGHTHS[part] if part else " ") + " " * (width - full_cells - 1)
    else:
        cells = "█" * width
    if delta_counts < 0:
        cells = "◂" + cells[1:]
    filled = min(width, full_cells + (1 if part else 0))
    # One run per stretch of one style (fill, empty, the two marks): a handful of spans per bar.
    if r_cell < t_cell:
        marks = ((r_cell, RELEASE_MARK, "release"), (t_cell, THRESHOLD_MARK, "threshold"))
    elif r_cell > t_cell:
        marks = ((t_cell, THRESHOLD_MARK, "threshold"), (r_cell, RELEASE_MARK, "release"))
    else:  # one cell for both: the release mark wins it, as it always has
        marks = ((t_cell, RELEASE_MARK, "release"),)
    pos = 0
    for cell, glyph, mark_role in marks:
        _runs(text, cells, pos, cell, filled, fill_style, empty_style)
        text.append((glyph, styles.get(mark_role, NULL)))
        pos = cell + 1
    _runs(text, cells, pos, width, filled, fill_style, empty_style)
    if eighths > width * 8:
        # Past the end of the scale: say so rather than clip silently.
        last, style = text[-1]
        text[-1] = (last[:-1] + "▸", style) if len(last) > 1 else ("▸", fill_style)
    return text


def _runs(out: list[Piece], cells: str, start: int, stop: int, filled: int, fill: Style,
          empty: Style) -> None:
    if start >= stop:
        return
    split = max(start, min(stop, filled))
    if split > start:
        out.append((cells[start:split], fill))
    if stop > split:
        out.append((cells[split:stop], empty))
