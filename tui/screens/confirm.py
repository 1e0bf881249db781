"""A yes/no question (quit with unsaved edits, drop them for another profile): `y` yes, `n` or Esc no.

Enter is deliberately not an answer: these questions guard against losing work, so a reflex
Enter must not say yes.
"""

from __future__ import annotations

from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Static


class ConfirmScreen(ModalScreen[bool]):
    BINDINGS: ClassVar = [
        Binding("y", "answer(True)", "Yes", id="confirm.yes"),
        Binding("n,escape", "answer(False)", "No", id="confirm.no"),
    ]

    def __init__(self, question: str, yes: str = "yes", no: str = "no") -> None:
        super().__init__()
        self._question = question
        self._yes, self._no = yes, no

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(self._question, classes="dialog-question")
            yield Static(f"[y] {self._yes}    [n / Esc] {self._no}", classes="dialog-keys",
                         markup=False)

    def action_answer(self, yes: bool) -> None:
        self.dismiss(yes)
