"""Ask for one line of text (a value, a file name); a check may refuse it with a reason, the dialog stays.

Keys typed in the same burst as the key that opened the dialog are the dialog's: they reach the app
before the input can take them (Textual resolves a key's binding when it has bubbled up, by which time
the dialog is on top but its input not focused yet). The app hands such keys to `take_key`; they are
typed, in order, once the input has focus, so `Enter 5 0 Enter` sets 50 however fast it comes. For the
same reason the input acts on its editing keys itself (`PromptInput`): `Ctrl+A Ctrl+K /tmp/x` typed
at once clears the proposed name first, then types the new one.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import ClassVar

from textual import events
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Static

# Returns None when the text is acceptable, else the one-line reason it is not.
Check = Callable[[str], str | None]
# What the text as typed so far amounts to (a time's rounding to frames), or empty: shown as it is typed.
Note = Callable[[str], str]


class PromptInput(Input):
    """An Input whose editing keys act in the order they were typed, among the characters.

    Textual runs a widget's bindings when the key has bubbled up to the app, while characters are
    typed at once: in a burst, `Ctrl+K` would act after the characters that followed it. Here the key
    that is one of the input's own bindings runs its action at once, in its turn.
    """

    _EDITING: ClassVar[dict[str, str]] = {b.key: b.action for b in Binding.make_bindings(Input.BINDINGS)}

    async def on_key(self, event: events.Key) -> None:
        action = self._EDITING.get(event.key)
        if action is not None:
            event.stop()
            event.prevent_default()
            await self.run_action(action)


class PromptScreen(ModalScreen[str | None]):
    BINDINGS: ClassVar = [Binding("escape", "cancel", "Cancel", id="prompt.cancel", key_display="Esc")]

    def __init__(self, question: str, value: str = "", check: Check | None = None, hint: str = "",
                 note: Note | None = None) -> None:
        super().__init__()
        self._question = question
        self._value = value
        self._check = check
        self._hint = hint
        self._note = note
        self._early: list[events.Key] | None = []  # None once the input has focus and they were typed

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(self._question, classes="dialog-question", markup=False)
            if self._hint:
                yield Static(self._hint, id="prompt-hint", classes="dialog-hint", markup=False)
            yield PromptInput(value=self._value, id="prompt-input", select_on_focus=True)
            if self._note:
                yield Static("", id="prompt-note", classes="dialog-hint", markup=False)
            yield Static("", id="prompt-error", classes="dialog-error", markup=False)
            yield Static("Enter accepts, Esc cancels", classes="dialog-keys", markup=False)

    def on_mount(self) -> None:
        self.query_one(Input).cursor_blink = False
        self.query_one(Input).focus()

    def on_descendant_focus(self, event: events.DescendantFocus) -> None:
        if self._early is not None and isinstance(event.widget, Input):
            early, self._early = self._early, None
            for key in early:  # typed now, through the app, so they take the same path as later keys
                self.app.post_message(key)

    def take_key(self, key: str, character: str | None) -> None:
        """A key the user typed for this dialog that went the screen below's way."""
        event = events.Key(key, character)
        if self._early is not None:
            self._early.append(event)
        else:
            self.app.post_message(event)

    def on_input_changed(self, event: Input.Changed) -> None:
        if self._note:
            note = self.query_one("#prompt-note", Static)
            text = self._note(event.value)
            note.update(text)
            note.display = bool(text)  # no empty line while the text amounts to nothing to say

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        reason = self._check(event.value) if self._check else None
        if reason:
            self.query_one("#prompt-error", Static).update(f"✗ {reason}")
            return
        self.dismiss(event.value)

    def action_cancel(self) -> None:
        self.dismiss(None)
