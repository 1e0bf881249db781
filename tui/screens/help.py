"""The help screen: every key of the live screen, read from its bindings, then the safety cautions."""

from __future__ import annotations

from collections.abc import Iterable
from typing import ClassVar

from rich.console import Group
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Footer, Static

from tui.render.help import cautions_text, help_tables


class HelpScreen(ModalScreen[None]):
    BINDINGS: ClassVar = [
        Binding("escape,q,question_mark,f1", "dismiss", "close help", id="help.close", key_display="Esc"),
        Binding("down,j", "scroll('down')", "Scroll down", show=False),
        Binding("up,k", "scroll('up')", "Scroll up", show=False),
        Binding("pagedown,space", "scroll('page_down')", "Page down", show=False),
        Binding("pageup", "scroll('page_up')", "Page up", show=False),
        Binding("home", "scroll('home')", "Top", show=False),
        Binding("end", "scroll('end')", "End", show=False),
    ]

    def __init__(self, rows: Iterable[tuple[str, str, str]]) -> None:
        super().__init__()
        self._rows = list(rows)

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="help-body"):
            yield Static("padtune keys  (Esc closes; ↑/↓, PgUp/PgDn, Home/End scroll)", id="help-title")
            yield Static("Boards may be mains-powered: the safety cautions are at the end of this page "
                         "(End).", id="help-safety-pointer")
            tables = help_tables(self._rows)
            spaced = [item for table in tables for item in (table, Text(""))]
            yield Static(Group(*spaced), id="help-keys")
            yield Static(cautions_text(), id="help-safety")
        yield Footer(compact=True, show_command_palette=False)

    def action_dismiss(self, result: None = None) -> None:  # type: ignore[override]
        self.dismiss(None)

    def action_scroll(self, how: str) -> None:
        body = self.query_one("#help-body", VerticalScroll)
        {"down": body.scroll_down, "up": body.scroll_up, "page_down": body.scroll_page_down,
         "page_up": body.scroll_page_up, "home": body.scroll_home, "end": body.scroll_end}[how]()
