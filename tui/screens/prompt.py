"""Ask for one line of text (a value, a file name); a check may refuse it with a reason, the dialog stays."""

from __future__ import annotations

from collections.abc import Callable
from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Static

# Returns None when the text is acceptable, else the one-line reason it is not.
Check = Callable[[str], str | None]


class PromptScreen(ModalScreen[str | None]):
    BINDINGS: ClassVar = [Binding("escape", "cancel", "Cancel", id="prompt.cancel", key_display="Esc")]

    def __init__(self, question: str, value: str = "", check: Check | None = None, hint: str = "") -> None:
        super().__init__()
        self._question = question
        self._value = value
        self._check = check
        self._hint = hint or "Enter accepts, Esc cancels"

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(self._question, classes="dialog-question", markup=False)
            yield Input(value=self._value, id="prompt-input", select_on_focus=True)
            yield Static("", id="prompt-error", classes="dialog-error", markup=False)
            yield Static(self._hint, classes="dialog-keys", markup=False)

    def on_mount(self) -> None:
        self.query_one(Input).cursor_blink = False
        self.query_one(Input).focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        reason = self._check(event.value) if self._check else None
        if reason:
            self.query_one("#prompt-error", Static).update(f"✗ {reason}")
            return
        self.dismiss(event.value)

    def action_cancel(self) -> None:
        self.dismiss(None)
