"""The first step of the guided capture: which keys to capture.

A list of ready-made choices (all keys, the key selected when the capture opened, each exclusive group
and slider of the profile, with their step counts) and a field where keys are typed as numbers, ranges
and names (`processing.capture.choose_keys`). ↑ ↓ and Enter pick from the list; Tab moves to the field,
Enter there reads it, and a mistake is one line under it (nothing is lost: the text stays to correct).
The widget posts `KeyChoice.Chosen(channels)`; the screen starts the capture with them. The lines are
drawn by `tui.render.capture`.
"""

from __future__ import annotations

from collections.abc import Sequence

from rich.text import Text
from textual.app import ComposeResult
from textual.containers import Vertical
from textual.message import Message
from textual.widgets import Input, OptionList, Static
from textual.widgets.option_list import Option

from processing.capture import choose_keys
from tui.render.capture import choice_prompt, key_choices, typing_example

TYPE_KEYS = "type"  # the choice that moves to the field where keys are typed
HELP = "Which keys? ↑ ↓ and Enter; or type them (Tab): numbers, ranges, names"

KeySet = tuple[str, str, Sequence[int]]  # (kind, name, channels): "group zones", "slider duration"


class KeyChoice(Vertical):
    """Choose the keys of a capture; `offer(names, selected, sets)` fills it once the keys are known."""

    class Chosen(Message):
        def __init__(self, channels: list[int]) -> None:
            super().__init__()
            self.channels = channels

    def __init__(self, **kwargs: object) -> None:
        super().__init__(**kwargs)  # type: ignore[arg-type]
        self._names: tuple[str, ...] = ()
        self._sets: list[KeySet] = []
        self._choices: dict[str, list[int]] = {}
        self._drawn_for: tuple[tuple[str, ...], int | None, int] | None = None
        self._selected: int | None = None

    def compose(self) -> ComposeResult:
        yield Static("Guided capture", classes="capture-title")
        yield Static("waiting for the board to say which keys it has…", id="capture-choose-help")
        yield OptionList(id="capture-choices")
        yield Input(placeholder="keys to capture", id="capture-keys")
        yield Static("", id="capture-choose-notice")

    def offer(self, names: Sequence[str], selected: int | None, sets: Sequence[KeySet]) -> None:
        """Show the choices for these keys (redrawn only when the keys or the width changed)."""
        names = tuple(names)
        width = (self.size.width or 80) - 6  # the list's border, padding and scrollbar
        self._names, self._sets, self._selected = names, list(sets), selected
        if not names or self._drawn_for == (names, selected, width):
            return
        self._drawn_for = (names, selected, width)
        choices = key_choices(names, selected, self._sets)
        self._choices = {cid: channels for cid, _, channels in choices}
        options = self.query_one(OptionList)
        options.clear_options()
        options.add_options([Option(choice_prompt(label, channels, names, width), id=cid)
                             for cid, label, channels in choices])
        options.add_option(Option(Text("some keys: type them…"), id=TYPE_KEYS))
        options.highlighted = 0
        example = typing_example(names)
        groups = ", a group's name" if self._sets else ""
        self.query_one("#capture-choose-help", Static).update(f"{HELP}{groups}, such as {example}")
        self.query_one(Input).placeholder = f"keys to capture, such as {example}"
        if not self.query_one(Input).has_focus:
            options.focus()

    def on_resize(self) -> None:
        if self._names:
            self.offer(self._names, self._selected, self._sets)

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        event.stop()
        if event.option_id == TYPE_KEYS:
            self.query_one(Input).focus()
        elif event.option_id in self._choices:
            self.post_message(self.Chosen(list(self._choices[event.option_id])))

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        try:
            channels = choose_keys(event.value, self._names, {name: list(c) for _, name, c in self._sets})
        except ValueError as exc:
            self.query_one("#capture-choose-notice", Static).update(Text(str(exc)))
            return
        self.query_one("#capture-choose-notice", Static).update("")
        self.post_message(self.Chosen(channels))
