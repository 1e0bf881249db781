"""The board holds other settings than the profile: take the board's, or send the profile's.

Shown once after the live screen read a board that takes settings (PROTOCOL.md section 7) and found
differences from the loaded profile; one line per difference (the first ones, and how many more).
The screen owns its keys: `b` takes the board's values into the session (nothing is sent), `p` sends
the profile's to the board, Esc leaves both as they are (edits are still sent, setting by setting).
"""

from __future__ import annotations

from typing import ClassVar, Literal

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Static

from processing.board_settings import Difference
from tui.words import plural

DiffChoice = Literal["board", "profile"]
SHOWN_LINES = 8


class BoardDiffScreen(ModalScreen[DiffChoice | None]):
    BINDINGS: ClassVar = [
        Binding("b", "answer('board')", "Take the board's settings", id="diff.board"),
        Binding("p", "answer('profile')", "Send the profile's settings to the board", id="diff.profile"),
        Binding("escape", "answer(None)", "Leave both as they are", id="diff.later"),
    ]

    def __init__(self, board: str, profile: str, found: list[Difference]) -> None:
        super().__init__()
        self._board, self._profile, self._found = board, profile, found

    def compose(self) -> ComposeResult:
        found = self._found
        shown = found if len(found) <= SHOWN_LINES + 1 else found[:SHOWN_LINES]  # "1 more" takes a line too
        lines = [d.line() for d in shown]
        if len(found) > len(shown):
            lines.append(f"… and {plural(len(found) - len(shown), 'more difference')}")
        with Vertical(classes="dialog"):
            yield Static(f"{self._board} holds other settings than {self._profile} "
                         f"({plural(len(found), 'difference')}):", classes="dialog-question", markup=False)
            yield Static("\n".join(lines), classes="dialog-list", markup=False)
            yield Static("[b] take the board's    [p] send the profile's    [Esc] leave both",
                         classes="dialog-keys", markup=False)

    def action_answer(self, choice: DiffChoice | None) -> None:
        self.dismiss(choice)
