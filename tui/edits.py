"""Setting edits as steps that can be undone and redone; pure, no Textual, no engine.

An edit is a batch (one key press may change one channel, a group or all channels) of
`(channel, before, after)` changes of frozen values (settings, a polarity choice, or whether the
profile may call the channel's settings measured). Applying is the
caller's job (`tui.editor.Editor`): the history only says what to apply, so it is tested without a
board.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from processing.settings import ChannelSettings
from tui.fields import PolarityChoice


@dataclass(frozen=True, slots=True)
class MeasuredMark:
    """Whether the profile may call a channel's settings measured (False: saved `measured = false`)."""

    measured: bool


# What one change sets on a channel: its settings, its polarity, or its measured mark.
EditValue = ChannelSettings | PolarityChoice | MeasuredMark


@dataclass(frozen=True, slots=True)
class Change:
    channel: int
    before: EditValue
    after: EditValue


@dataclass(frozen=True, slots=True)
class Edit:
    """What was done (`description`, as the log said it) and, for undo, what it comes back to
    (`back`: "zone1 threshold 100 again"; empty for a batch, whose description says enough)."""

    description: str
    changes: tuple[Change, ...]
    back: str = ""


class EditHistory:
    """Undo and redo stacks, bounded; a new edit clears the redo stack (as every editor does)."""

    def __init__(self, limit: int = 500) -> None:
        self._undo: list[Edit] = []
        self._redo: list[Edit] = []
        self._limit = limit

    def record(self, description: str, changes: Sequence[Change], back: str = "") -> Edit | None:
        real = tuple(c for c in changes if c.before != c.after)
        if not real:
            return None
        edit = Edit(description, real, back)
        self._undo.append(edit)
        del self._undo[: -self._limit]
        self._redo.clear()
        return edit

    def undo(self) -> Edit | None:
        """The edit to take back (apply each change's `before`), or None; it can be redone after."""
        if not self._undo:
            return None
        edit = self._undo.pop()
        self._redo.append(edit)
        return edit

    def redo(self) -> Edit | None:
        """The edit to do again (apply each change's `after`), or None."""
        if not self._redo:
            return None
        edit = self._redo.pop()
        self._undo.append(edit)
        return edit

    @property
    def can_undo(self) -> bool:
        return bool(self._undo)

    @property
    def can_redo(self) -> bool:
        return bool(self._redo)

    def clear(self) -> None:
        self._undo.clear()
        self._redo.clear()
