"""A channel's settings as lines, the one being edited marked, with release level worked out."""

from __future__ import annotations

from rich.text import Text

from processing.settings import ChannelSettings
from tui.fields import FIELDS
from tui.render import Styles, pick


def settings_text(settings: ChannelSettings, selected_key: str | None, styles: Styles,
                  rate_hz: float | None = None) -> Text:
    text = Text(no_wrap=True, end="")
    for f in FIELDS:
        value = getattr(settings, f.key)
        mark = "▸" if f.key == selected_key else " "
        role = "cursor" if f.key == selected_key else "name"
        text.append(f"{mark} {f.label:<19} ", pick(styles, role))
        if f.key == "stuck_timeout_frames" and value == 0:
            text.append(f"{'never':>6}", pick(styles, role))
        else:
            text.append(f"{value:>6} {f.unit}", pick(styles, role))
        if rate_hz and f.unit == "frames" and value:
            text.append(f" {_duration(value / rate_hz)}", pick(styles, "dim"))
        text.append("\n")
    text.append(f"  {'release level':<19} {settings.release_level_counts:>6} counts", pick(styles, "dim"))
    return text


def _duration(seconds: float) -> str:
    return f"{seconds * 1000:.0f} ms" if seconds < 10 else f"{seconds:.0f} s"


def edit_bar(name: str, settings: ChannelSettings, selected_key: str, styles: Styles, width: int,
             position: str = "") -> Text:
    """One line: the selected channel and its main settings, the field under edit marked with `▸`."""
    text = Text(no_wrap=True, end="")
    text.append(f"{name} ", pick(styles, "header"))
    if position:
        text.append(f"{position} ", pick(styles, "dim"))
    for f in FIELDS:
        value = getattr(settings, f.key)
        chosen = f.key == selected_key
        label = f.label if chosen else f.short
        piece = f"{'▸' if chosen else ' '}{label} {value}"
        if text.cell_len + len(piece) + 1 > width and not chosen:
            continue
        text.append(piece, pick(styles, "cursor" if chosen else "dim"))
        text.append(" ")
    return text
