"""Questions that guard against losing work: yes/no (drop unsaved edits for another profile), and the
quit question with unsaved edits (save and quit, quit without saving, or stay).

Enter is deliberately not an answer: a reflex Enter must not throw edits away.
"""

from __future__ import annotations

from typing import ClassVar, Literal

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


QuitChoice = Literal["save", "discard", "stay"]


class QuitScreen(ModalScreen[QuitChoice]):
    """Quit with unsaved edits: `s` saves them first (asking for a file name if there is none yet),
    `y` quits without them, `n` or Esc goes back."""

    BINDINGS: ClassVar = [
        Binding("s", "answer('save')", "Save and quit", id="quit.save"),
        Binding("y", "answer('discard')", "Quit without saving", id="quit.discard"),
        Binding("n,escape", "answer('stay')", "Cancel", id="quit.stay"),
    ]

    def __init__(self, question: str) -> None:
        super().__init__()
        self._question = question

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(self._question, classes="dialog-question", markup=False)
            yield Static("[s] save, then quit    [y] quit without saving    [n / Esc] cancel",
                         classes="dialog-keys", markup=False)

    def action_answer(self, choice: QuitChoice) -> None:
        self.dismiss(choice)
