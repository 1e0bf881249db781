"""The link strip at the top: connection, counters, recording and profile (see render/link.py)."""

from __future__ import annotations

from typing import ClassVar

from rich.style import Style
from textual.widgets import Static

from tui.render.link import link_strip
from tui.render.views import LinkView

ROLES = ("good", "warn", "bad", "dim", "name")


class LinkStrip(Static):
    COMPONENT_CLASSES: ClassVar[set[str]] = {f"link-strip--{role}" for role in ROLES}

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__("", id=id)
        self._last_plain: str | None = None
        self._last_view: LinkView | None = None
        self._last_compact: tuple[bool, int] | None = None
        self._styles: dict[str, Style] | None = None
        self._last_state: str | None = None

    def notify_style_update(self) -> None:
        super().notify_style_update()
        self._styles = None
        self._last_view = None

    def show(self, view: LinkView) -> None:
        width = self.app.size.width
        compact = width < 140
        if view == self._last_view and (compact, width) == self._last_compact:
            return
        self._last_view, self._last_compact = view, (compact, width)
        if self._styles is None:
            self._styles = {
                role: self.get_component_rich_style(f"link-strip--{role}", partial=True) for role in ROLES
            }
        text = link_strip(view, self._styles, compact=compact, width=width - 2)
        if text.plain == self._last_plain and view.state == self._last_state:
            return  # the same words: no update, so no layout pass
        self._last_plain, self._last_state = text.plain, view.state
        self.set_class(view.state in ("disconnected", "reconnecting"), "-down")
        self.update(text)
