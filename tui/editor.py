"""Editing a live session's settings: a plain object that applies, refuses, rolls back and remembers.

Every call returns an `EditResult` that says what happened: applied (its line for the log), refused
with the reason, not possible now, or nothing to do. The editor never talks to the screen; the live
screen turns results into a log line or a notice, and tests drive it without a pilot. Steps and typed
values go through `ChannelSettings.problems()` (via `tui.fields`), so it refuses exactly what the
engine and the profile loader would, with the same words. A batch (copy to all, to a group, the guided
capture's suggestions) is applied whole or not at all, and is one step of undo.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from enum import Enum
from typing import Protocol

from processing.settings import ChannelSettings
from tui.edits import Change, Edit, EditHistory, EditValue, MeasuredMark
from tui.fields import (
    POLARITY_KEY,
    PolarityChoice,
    allowed_range,
    field,
    parse_polarity,
    polarity_meaning,
    polarity_word,
    stepped,
    typed_frames,
    with_value,
)
from tui.words import plural, with_unit


class Outcome(Enum):
    APPLIED = "applied"  # the session changed: the message is the log's line
    REFUSED = "refused"  # the value is not allowed: nothing changed, the message says why
    UNAVAILABLE = "unavailable"  # cannot be done now (no board yet, no group): nothing changed
    UNCHANGED = "unchanged"  # nothing to do (already so, nothing to undo)


@dataclass(frozen=True, slots=True)
class EditResult:
    outcome: Outcome
    message: str  # one line, for the log (applied) or a notice (the rest)
    edit: Edit | None = None

    @property
    def applied(self) -> bool:
        return self.outcome is Outcome.APPLIED


class EditTarget(Protocol):
    """What the editor needs of the live session (`tui.source.LiveSource` provides it)."""

    def channel_names(self) -> list[str]: ...
    def settings(self, channel: int) -> ChannelSettings: ...
    def apply(self, channel: int, settings: ChannelSettings) -> None: ...  # ValueError when refused
    def polarity(self, channel: int) -> int | None: ...
    def set_polarity(self, channel: int, sign: int | None) -> None: ...  # ValueError when refused
    def group_of(self, channel: int) -> Sequence[int]: ...
    # only for a batch with marks (the guided capture's keys without a suggestion):
    def measured(self, channel: int) -> bool: ...
    def set_measured(self, channel: int, measured: bool) -> None: ...


NO_BOARD = EditResult(Outcome.UNAVAILABLE, "No channels yet: waiting for the board's first frames.")


class Editor:
    """Edits of one `EditTarget`, with their undo history."""

    def __init__(self, target: EditTarget, history: EditHistory | None = None) -> None:
        self.target = target
        self.history = history or EditHistory()

    # -- one value --------------------------------------------------------------------------------
    def step(self, channel: int, key: str, steps: int, coarse: bool = False) -> EditResult:
        """`steps` fine or coarse steps up (negative: down); on the polarity field up is +, down -."""
        if not self._has(channel):
            return NO_BOARD
        if key == POLARITY_KEY:
            return self.set_polarity(channel, 1 if steps > 0 else -1)
        return self.set_value(channel, key, stepped(self.target.settings(channel), key, steps, coarse))

    def set_value(self, channel: int, key: str, value: int, note: str = "") -> EditResult:
        """`note` (how a typed time became frames) follows the log line and the refusal."""
        if not self._has(channel):
            return NO_BOARD
        old = self.target.settings(channel)
        new, reason = with_value(old, key, value)
        f = field(key)
        said = f" ({note})" if note else ""
        if reason:
            return EditResult(Outcome.REFUSED, f"Refused: {reason}{said}. "
                              f"It stays {with_unit(getattr(old, key), f.unit)}.")
        name = self._name(channel)
        before = getattr(old, key)
        if before == value:
            return EditResult(Outcome.UNCHANGED, f"{name}: {f.label} is {value} already{said}.")
        return self._apply(f"{name}: {f.label} {before} → {value}{said}", [Change(channel, old, new)],
                           back=f"{f.label} {before} again")

    def check_text(self, channel: int, key: str, text: str, rate_hz: float | None = None) -> str | None:
        """Why a typed value would be refused (one line), or None: for the value dialog's check. Frame
        counts may be typed as times (`40ms`, `0.04s`) at the board's `rate_hz`."""
        try:
            if key == POLARITY_KEY:
                parse_polarity(text)
                return None
            value, time = typed_frames(text, key, rate_hz)
            reason = with_value(self.target.settings(channel), key, value)[1]
            return f"{reason} ({time.note()})" if reason and time else reason
        except ValueError as exc:
            return str(exc)

    def rounding(self, key: str, text: str, rate_hz: float | None) -> str:
        """What a typed time becomes (`40 ms = 2.4 frames at 60 Hz: 2 frames (33 ms)`), or empty when
        the text is no time (or not readable yet): the value dialog shows it as the user types."""
        if key == POLARITY_KEY:
            return ""
        try:
            time = typed_frames(text, key, rate_hz)[1]
        except ValueError:
            return ""
        return time.note() if time else ""

    def type_value(self, channel: int, key: str, text: str, rate_hz: float | None = None) -> EditResult:
        """A value typed in the dialog: a whole number (or a time for a frame count, at `rate_hz`), or
        for the polarity `+`, `-` or `?`."""
        try:
            if key == POLARITY_KEY:
                return self.set_polarity(channel, parse_polarity(text))
            value, time = typed_frames(text, key, rate_hz)
            return self.set_value(channel, key, value, time.note() if time else "")
        except ValueError as exc:
            return EditResult(Outcome.REFUSED, f"Refused: {exc}.")

    def allowed(self, channel: int, key: str, rate_hz: float | None = None) -> str:
        """What `key` may be set to on `channel` now, in words (for the value dialog); frame counts in
        ms too at `rate_hz`."""
        if key == POLARITY_KEY:
            return "+ (counts rise on touch), - (they fall) or ? (learn it from the next touch)"
        return allowed_range(self.target.settings(channel), key, rate_hz) if self._has(channel) else ""

    def set_polarity(self, channel: int, sign: int | None) -> EditResult:
        """+ counts rise on touch, - they fall, None: learn it again from the next touch."""
        if not self._has(channel):
            return NO_BOARD
        old = self.target.polarity(channel)
        name = self._name(channel)
        if old == sign:
            already = f"{name}: polarity is {polarity_word(sign)} already ({polarity_meaning(sign)})."
            return EditResult(Outcome.UNCHANGED, already)
        return self._apply(f"{name}: polarity {polarity_word(old)} → {polarity_word(sign)}",
                           [Change(channel, PolarityChoice(old), PolarityChoice(sign))],
                           back=f"polarity {polarity_word(old)} again")

    # -- batches ----------------------------------------------------------------------------------
    def copy_to_all(self, channel: int) -> EditResult:
        if not self._has(channel):
            return NO_BOARD
        return self._copy(channel, range(len(self.target.channel_names())), "all channels")

    def copy_to_group(self, channel: int) -> EditResult:
        if not self._has(channel):
            return NO_BOARD
        members = self.target.group_of(channel)
        if len(members) < 2:
            return EditResult(Outcome.UNAVAILABLE,
                              "This channel is in no group (groups come from the profile).")
        return self._copy(channel, members, "its group")

    def _copy(self, channel: int, targets: Sequence[int], what: str) -> EditResult:
        settings = self.target.settings(channel)
        changes = [Change(t, self.target.settings(t), settings) for t in targets if t != channel]
        real = [c for c in changes if c.before != c.after]
        if not real:
            return EditResult(Outcome.UNCHANGED, f"{what[0].upper()}{what[1:]}: already the same settings.")
        return self._apply(f"copied {self._name(channel)}'s settings to {what} "
                           f"({plural(len(real), 'channel')} changed)", real)

    def apply_batch(self, description: str, settings: Mapping[int, ChannelSettings],
                    polarity: Mapping[int, int | None] | None = None,
                    measured: Mapping[int, bool] | None = None) -> EditResult:
        """New settings (and polarities) for several channels as one undoable edit, all or none: the
        guided capture's outcome. Polarities go first (a threshold's meaning depends on them); `measured`
        marks channels whose settings the profile may (True) or may not (False) call measured."""
        names = self.target.channel_names()
        if not names:
            return NO_BOARD
        wrong = [c for c in [*settings, *(polarity or {}), *(measured or {})] if not 0 <= c < len(names)]
        if wrong:
            return EditResult(Outcome.REFUSED, f"Refused: no channel {wrong[0]} on this board "
                              f"({plural(len(names), 'channel')}).")
        changes = [Change(c, PolarityChoice(self.target.polarity(c)), PolarityChoice(sign))
                   for c, sign in sorted((polarity or {}).items())]
        changes += [Change(c, self.target.settings(c), s) for c, s in sorted(settings.items())]
        changes += [Change(c, MeasuredMark(self.target.measured(c)), MeasuredMark(m))
                    for c, m in sorted((measured or {}).items())]
        real = [c for c in changes if c.before != c.after]
        if not real:
            return EditResult(Outcome.UNCHANGED, f"{description}: nothing to change.")
        return self._apply(description, real)

    # -- undo and redo ----------------------------------------------------------------------------
    def undo(self) -> EditResult:
        edit = self.history.undo()
        if edit is None:
            return EditResult(Outcome.UNCHANGED, "Nothing to undo.")
        failed = self._replay(edit, "before")
        if failed:
            return EditResult(Outcome.REFUSED, f"Cannot undo: {failed}. The edit history was cleared.")
        back = f" ({edit.back})" if edit.back else ""
        return EditResult(Outcome.APPLIED, f"undid {edit.description}{back}", edit)

    def redo(self) -> EditResult:
        edit = self.history.redo()
        if edit is None:
            return EditResult(Outcome.UNCHANGED, "Nothing to redo.")
        failed = self._replay(edit, "after")
        if failed:
            return EditResult(Outcome.REFUSED, f"Cannot redo: {failed}. The edit history was cleared.")
        return EditResult(Outcome.APPLIED, f"redid {edit.description}", edit)

    def forget(self) -> bool:
        """Drop the history (another profile was loaded, the board changed width): True if it held any."""
        had = self.history.can_undo or self.history.can_redo
        self.history.clear()
        return had

    # -- applying ---------------------------------------------------------------------------------
    def _apply(self, description: str, changes: list[Change], back: str = "") -> EditResult:
        done: list[Change] = []
        for change in changes:
            try:
                self._set(change.channel, change.after)
            except ValueError as exc:  # refused half way: take back what was done, all or nothing
                for undo in reversed(done):
                    self._set(undo.channel, undo.before)
                return EditResult(Outcome.REFUSED, f"Refused: {exc}.")
            done.append(change)
        edit = self.history.record(description, done, back)
        return EditResult(Outcome.APPLIED, description, edit)

    def _replay(self, edit: Edit, side: str) -> str | None:
        """Apply one side of every change; on a refusal (the board changed under the edit) the history
        is cleared and the reason returned."""
        try:
            for change in edit.changes if side == "after" else reversed(edit.changes):
                self._set(change.channel, change.after if side == "after" else change.before)
        except ValueError as exc:
            self.history.clear()
            return str(exc)
        return None

    def _set(self, channel: int, value: EditValue) -> None:
        """Apply one side of a change: new settings, a channel's polarity or its measured mark (ValueError
        if refused)."""
        if isinstance(value, PolarityChoice):
            self.target.set_polarity(channel, value.sign)
        elif isinstance(value, MeasuredMark):
            self.target.set_measured(channel, value.measured)
        else:
            self.target.apply(channel, value)

    def _has(self, channel: int) -> bool:
        return 0 <= channel < len(self.target.channel_names())

    def _name(self, channel: int) -> str:
        return self.target.channel_names()[channel]
