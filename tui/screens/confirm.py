"""A yes/no question (quit with unsaved edits, overwrite a file): `y` or Enter yes, `n` or Esc no."""

from __future__ import annotations

from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Static


class ConfirmScreen(ModalScreen[bool]):
    BINDINGS: ClassVar = [
        Binding("y,enter", "answer(True)", "Yes", id="confirm.yes"),
        Binding("n,escape", "answer(False)", "No", id="confirm.no"),
    ]

    def __init__(self, question: str, yes: str = "yes", no: str = "no") -> None:
        super().__init__()
        self._question = question
        self._yes, self._no = yes, no

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(self._question, classes="dialog-question")
            yield Static(f"[y / Enter] {self._yes}    [n / Esc] {self._no}", classes="dialog-keys",
                         markup=False)

    def action_answer(self, yes: bool) -> None:
        self.dismiss(yes)
