"""The edit bar under the table: the selected channel's settings, the one being edited marked.

The screen sets `view` (a frozen snapshot); the bar redraws only when it changes or the bar is resized.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from rich.text import Text
from textual.reactive import reactive
from textual.widget import Widget

from processing.settings import ChannelSettings
from tui.render.settings import edit_bar

ROLES = ("header", "cursor", "dim", "pending", "applied", "refused")


@dataclass(frozen=True, slots=True)
class EditBarView:
    name: str
    settings: ChannelSettings
    field_key: str  # the setting being edited
    position: str = ""  # "3/64" when there is more than one channel
    polarity: int | None = 1
    status: str = ""  # "provisional", "measuring noise", or "" when tuned
    pending: frozenset[str] = frozenset()  # settings not in force yet (shown as --)
    # What a board that takes settings did with each one it was sent: (key, applied / refused /
    # sending / no answer), empty for a board without settings=1 (the bar is then as before).
    board: tuple[tuple[str, str], ...] = ()
    rate_hz: float | None = None  # the board's frame rate: frame counts read in ms too (None: not known)


class EditBar(Widget):
    COMPONENT_CLASSES: ClassVar[set[str]] = {f"edit-bar--{role}" for role in ROLES}

    view: reactive[EditBarView | None] = reactive(None, layout=False)

    def render(self) -> Text:
        v = self.view
        if v is None:
            return Text("waiting for the board to send its first frames…", no_wrap=True)
        styles = {r: self.get_component_rich_style(f"edit-bar--{r}", partial=True) for r in ROLES}
        return edit_bar(v.name, v.settings, v.field_key, styles, self.size.width, v.position, v.polarity,
                        v.status, v.pending, dict(v.board), v.rate_hz)
