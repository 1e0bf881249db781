"""The live screen's editing actions (step, type, copy to all or to the group, undo, redo) and the
simulated board's key presses: mixins of PadtuneApp, kept apart from the screen's drawing.

Every edit goes through `EditActions._apply_changes`, which applies it to the live session at once,
rolls back a batch that is refused half way, and records it for undo; the capture screen applies
its suggestions through it too.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from typing import TYPE_CHECKING

from processing.settings import ChannelSettings
from tui.edits import Change, Edit, EditHistory
from tui.fields import (
    POLARITY_KEY,
    PolarityChoice,
    field,
    parse_polarity,
    parse_value,
    polarity_meaning,
    polarity_word,
    stepped,
    with_value,
)
from tui.screens.prompt import PromptScreen

if TYPE_CHECKING:
    from tui.source import LiveSource


class EditActions:
    """Needs from the app: `source`, `history`, `cursor`, `field_index`, `field_key`, `notify`, `bell`,
    `push_screen`, `_log`, `_has_channels`, `_redraw_soon`, `refresh_now_if_idle`."""

    if TYPE_CHECKING:  # provided by PadtuneApp and textual.App
        source: LiveSource
        history: EditHistory
        field_index: int
        notify: Callable[..., None]
        bell: Callable[[], None]
        push_screen: Callable[..., object]

        @property
        def cursor(self) -> int: ...
        @property
        def field_key(self) -> str: ...
        def _log(self, line: str) -> None: ...
        def _has_channels(self) -> bool: ...
        def _redraw_soon(self) -> None: ...
        def refresh_now_if_idle(self) -> None: ...

    def _apply_value(self, channel: int, value: object) -> None:
        """Apply one side of a change: new settings, or a channel's polarity (ValueError if refused)."""
        if isinstance(value, PolarityChoice):
            self.source.set_polarity(channel, value.sign)
        elif isinstance(value, ChannelSettings):
            self.source.apply(channel, value)
        else:
            raise TypeError(f"not an edit of a channel: {value!r}")

    def _apply_changes(self, description: str, changes: list[Change]) -> None:
        done: list[Change] = []
        for change in changes:
            try:
                self._apply_value(change.channel, change.after)
            except ValueError as exc:
                for undo in reversed(done):
                    self._apply_value(undo.channel, undo.before)
                self.notify(f"Refused: {exc}", severity="warning")
                return
            done.append(change)
        if self.history.record(description, done):
            self._log(description)
        self._redraw_soon()
        self.refresh_now_if_idle()

    def _set_value(self, value: int) -> None:
        ch, key = self.cursor, self.field_key
        old = self.source.settings(ch)
        new, reason = with_value(old, key, value)
        if reason:
            self.bell()
            self.notify(f"Refused: {reason}. It stays {getattr(old, key)}.", severity="warning")
            return
        label = field(key).label
        name = self.source.channel_names()[ch]
        self._apply_changes(f"{name}: {label} {getattr(old, key)} → {value}", [Change(ch, old, new)])

    def _set_polarity(self, sign: int | None) -> None:
        """The polarity field: + counts rise on touch, - they fall, None learns it from the next touch."""
        ch = self.cursor
        old = self.source.polarity(ch)
        name = self.source.channel_names()[ch]
        if old == sign:
            self.notify(f"{name}: polarity is {polarity_word(sign)} already ({polarity_meaning(sign)}).")
            return
        self._apply_changes(f"{name}: polarity {polarity_word(old)} → {polarity_word(sign)}",
                            [Change(ch, PolarityChoice(old), PolarityChoice(sign))])

    def action_step(self, steps: int, coarse: bool) -> None:
        if not self._has_channels():
            return
        if self.field_key == POLARITY_KEY:  # + and ] make it +, - and [ make it -
            self._set_polarity(1 if steps > 0 else -1)
            return
        self._set_value(stepped(self.source.settings(self.cursor), self.field_key, steps, coarse))

    def action_type_value(self) -> None:
        if not self._has_channels():
            return
        if self.field_key == POLARITY_KEY:
            self._type_polarity()
            return
        ch, key, f = self.cursor, self.field_key, field(self.field_key)
        current = self.source.settings(ch)

        def check(text: str) -> str | None:
            try:
                return with_value(current, key, parse_value(text, key))[1]
            except ValueError as exc:
                return str(exc)

        def done(text: str | None) -> None:
            if text is not None:
                self._set_value(parse_value(text, key))

        name = self.source.channel_names()[ch]
        unit = "a shift n: the baseline moves 1/2ⁿ of the way a step" if f.unit == "shift" else f.unit
        self.push_screen(PromptScreen(f"{name}: new {f.label} ({unit})", str(getattr(current, key)), check),
                         done)

    def _type_polarity(self) -> None:
        ch = self.cursor

        def check(text: str) -> str | None:
            try:
                parse_polarity(text)
            except ValueError as exc:
                return str(exc)
            return None

        def done(text: str | None) -> None:
            if text is not None:
                self._set_polarity(parse_polarity(text))

        name = self.source.channel_names()[ch]
        self.push_screen(PromptScreen(f"{name}: polarity (+ counts rise on touch, - they fall, ? learn it "
                                      "from the next touch)", polarity_word(self.source.polarity(ch)), check),
                         done)

    def _copy_to(self, targets: Iterable[int], what: str) -> None:
        ch = self.cursor
        settings = self.source.settings(ch)
        changes = [Change(t, self.source.settings(t), settings) for t in targets if t != ch]
        if not changes or all(c.before == c.after for c in changes):
            self.notify(f"{what}: already the same settings.")
            return
        name = self.source.channel_names()[ch]
        self._apply_changes(f"copied {name}'s settings to {what} ({len(changes)} channels)", changes)

    def action_apply_all(self) -> None:
        if self._has_channels():
            self._copy_to(range(len(self.source.channel_names())), "all channels")

    def action_apply_group(self) -> None:
        if not self._has_channels():
            return
        members = self.source.group_of(self.cursor)
        if len(members) < 2:
            self.notify("This channel is in no group (groups come from the profile).", severity="warning")
            return
        self._copy_to(members, "its group")

    def _replay(self, edit: Edit | None, verb: str) -> None:
        if edit is None:
            self.notify(f"Nothing to {verb}.")
            return
        try:
            for change in edit.changes:
                self._apply_value(change.channel, change.after)
        except ValueError as exc:  # the channels changed under the edit (no board, another width)
            self.history.clear()
            self.notify(f"Cannot {verb}: {exc}. The edit history was cleared.", severity="warning")
            return
        self._log(f"{verb}: {edit.description.removeprefix('undo ')}")
        self._redraw_soon()
        self.refresh_now_if_idle()

    def action_undo(self) -> None:
        self._replay(self.history.undo(), "undo")

    def action_redo(self) -> None:
        self._replay(self.history.redo(), "redo")


class PressActions:
    """The simulated board's keys from the keyboard (demo). Needs `source`, `held`, `cursor`, `notify`,
    `set_timer` and `_has_channels` from the app."""

    if TYPE_CHECKING:
        source: LiveSource
        held: set[int]
        notify: Callable[..., None]
        set_timer: Callable[..., object]

        @property
        def cursor(self) -> int: ...
        def _has_channels(self) -> bool: ...

    def _press(self, ch: int, pressed: bool) -> None:
        if not self.source.can_press():
            self.notify("Key presses from the keyboard work only on a simulated board (padtune demo).",
                        severity="warning")
            return
        names = self.source.channel_names()
        if not 0 <= ch < len(names):
            return
        if not self.source.press(ch, pressed):
            self.notify("The board is not connected: the key press was not sent.", severity="warning")
            return
        (self.held.add if pressed else self.held.discard)(ch)

    def action_tap(self) -> None:
        if self._has_channels() and self.source.can_press():
            ch = self.cursor
            self._press(ch, True)
            self.set_timer(0.4, lambda: self._press(ch, False))
        else:
            self._press(self.cursor, True)

    def action_hold(self) -> None:
        self.action_hold_number(self.cursor)

    def action_hold_number(self, ch: int) -> None:
        self._press(ch, ch not in self.held)
