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
        self._last: LinkView | None = None

    def show(self, view: LinkView) -> None:
        if view == self._last:
            return
        self._last = view
        styles: dict[str, Style] = {
            role: self.get_component_rich_style(f"link-strip--{role}", partial=True) for role in ROLES
        }
        self.set_class(view.state in ("disconnected", "reconnecting"), "-down")
        self.update(link_strip(view, styles, compact=self.app.size.width < 140))
