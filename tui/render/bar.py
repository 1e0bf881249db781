"""The delta bar: how far a channel's delta is from its threshold and its release level, in cells.

The fill uses eighth blocks; the threshold is always a `┃` and the release level (threshold minus
hysteresis) a `╎`, so both stay visible with or without colour, filled or not.
"""

from __future__ import annotations

from rich.text import Text

from tui.render import Styles, pick

_EIGHTHS = " ▏▎▍▌▋▊▉█"
THRESHOLD_MARK = "┃"
RELEASE_MARK = "╎"
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
    text = Text(no_wrap=True, end="")
    if width <= 0:
        return text
    per_cell = bar_scale_counts(threshold_counts, width)
    t_cell = min(width - 1, round(threshold_counts / per_cell))
    r_cell = min(width - 1, max(0, round(release_counts / per_cell)))
    eighths = int(max(0.0, delta_counts) / per_cell * 8)
    fill_style = pick(styles, role)
    empty_style = pick(styles, "bar-empty")
    for cell in range(width):
        if cell == t_cell:
            text.append(THRESHOLD_MARK, pick(styles, "threshold"))
        elif cell == r_cell:
            text.append(RELEASE_MARK, pick(styles, "release"))
        else:
            part = min(8, max(0, eighths - cell * 8))
            if part == 0 and cell == 0 and delta_counts < 0:
                text.append("◂", pick(styles, "dim"))
            elif part == 0:
                text.append(" ", empty_style)
            else:
                text.append(_EIGHTHS[part], fill_style)
    if eighths > width * 8:
        # Past the end of the scale: say so rather than clip silently.
        text.right_crop(1)
        text.append("▸", fill_style)
    return text
