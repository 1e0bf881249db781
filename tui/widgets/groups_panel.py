"""Groups and sliders: the winner of each exclusive group and each slider's position marker."""

from __future__ import annotations

from collections.abc import Sequence
from typing import ClassVar

from textual.widgets import Static

from tui.render.groups import groups_text
from tui.render.views import GroupView, SliderView

ROLES = ("header", "touched", "dim")


class GroupsPanel(Static):
    COMPONENT_CLASSES: ClassVar[set[str]] = {f"groups-panel--{role}" for role in ROLES}

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__("", id=id)
        self._last: tuple[tuple[GroupView, ...], tuple[SliderView, ...], int] | None = None

    def show(self, groups: Sequence[GroupView], sliders: Sequence[SliderView]) -> None:
        key = (tuple(groups), tuple(sliders), self.size.width)
        if key == self._last:
            return
        self._last = key
        styles = {r: self.get_component_rich_style(f"groups-panel--{r}", partial=True) for r in ROLES}
        self.update(groups_text(groups, sliders, self.size.width, styles))
