"""Groups and sliders as short text: which member of each group wins, where each slider is touched."""

from __future__ import annotations

from collections.abc import Sequence

from rich.text import Text

from tui.render import Styles, pick
from tui.render.views import GroupView, SliderView


def slider_track(position: int | None, resolution: int, width: int) -> str:
    """A track `width` cells wide with `◆` at the position (0..resolution), or all dots when untouched."""
    if width <= 0:
        return ""
    cells = ["─"] * width
    if position is not None and resolution > 0:
        cell = round(max(0, min(position, resolution)) / resolution * (width - 1))
        cells[cell] = "◆"
    return "".join(cells)


def groups_text(
    groups: Sequence[GroupView], sliders: Sequence[SliderView], width: int, styles: Styles
) -> Text:
    text = Text(no_wrap=True, end="")
    if not groups and not sliders:
        text.append("no key groups or sliders", pick(styles, "dim"))
        return text
    for group in groups:
        text.append(f"group {group.name}: ", pick(styles, "header"))
        if group.winner is None:
            text.append("none touched", pick(styles, "dim"))
        else:
            text.append(f"● {group.winner} wins", pick(styles, "touched"))
        others = [m for m in group.members if m != group.winner]
        if others and width > 50:
            text.append("  (" + " ".join(others) + ")", pick(styles, "dim"))
        text.append("\n")
    for slider in sliders:
        text.append(f"slider {slider.name} ", pick(styles, "header"))
        track_w = max(8, min(40, width - len(slider.name) - 20))
        text.append("[" + slider_track(slider.position, slider.resolution, track_w) + "]",
                    pick(styles, "touched" if slider.position is not None else "dim"))
        pos = "--" if slider.position is None else str(slider.position)
        text.append(f" {pos}/{slider.resolution}")
        text.append("\n")
    text.rstrip()
    return text
