"""Widgets that keep their last pass (`tui.widgets.kept_lines`) must draw exactly as Textual draws them
without it, after every kind of change: new text, a class that changes the background, a theme, a
parent's style, a widget shown and hidden. The reference is the same app drawn by Textual alone."""

from __future__ import annotations

from typing import ClassVar, TypeVar

from textual.app import App, ComposeResult
from textual.containers import Horizontal
from textual.widget import Widget
from textual.widgets import Footer, Static

from tui.widgets.kept_lines import KeptLinesCache, keep_lines

W = TypeVar("W", bound=Widget)

CSS = """
#box { height: 3; }
#note { width: 1fr; }
#note.-warm { background: $warning; }
#side { width: 12; border: round $accent; }
#box.-dim { opacity: 0.5; }
"""


class Sample(App[None]):
    CSS: ClassVar[str] = CSS
    BINDINGS: ClassVar = [("x", "bell", "Ring")]

    def __init__(self, kept: bool) -> None:
        super().__init__()
        self.kept = kept

    def wrap(self, widget: W) -> W:
        return keep_lines(widget) if self.kept else widget

    def compose(self) -> ComposeResult:
        self.note = self.wrap(Static("first", id="note"))
        self.side = self.wrap(Static("side", id="side"))
        self.ticker = Static("0", id="ticker")  # changes every step, as the table does on the screen
        yield self.wrap(Horizontal(self.note, self.side, id="box"))
        yield self.ticker
        yield self.wrap(Footer())


async def screens(kept: bool) -> list[str]:
    app = Sample(kept)
    shots = []
    async with app.run_test(size=(60, 10)) as pilot:
        steps = [
            lambda: None,
            lambda: app.note.update("second, longer text"),
            lambda: app.note.add_class("-warm"),
            lambda: setattr(app, "theme", "textual-light"),
            lambda: app.query_one("#box").add_class("-dim"),
            lambda: setattr(app.side, "display", False),
            lambda: setattr(app.side, "display", True),
            lambda: app.note.remove_class("-warm"),
            lambda: setattr(app, "theme", "nord"),
        ]
        for i, step in enumerate(steps):
            step()
            app.ticker.update(str(i))
            await pilot.pause()
            shots.append(app.export_screenshot())
        assert isinstance(app.note._styles_cache, KeptLinesCache) == kept
    return shots


async def test_kept_lines_draw_as_textual_after_every_change() -> None:
    kept, plain = await screens(True), await screens(False)
    for i, (a, b) in enumerate(zip(kept, plain, strict=True)):
        assert a == b, f"step {i} differs"
    assert len(set(plain)) == len(plain)  # every step changed the screen: none compared twice the same
