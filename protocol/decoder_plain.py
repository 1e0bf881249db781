"""The plain reference decoder: one line at a time through `LineRules`, no numpy tricks.

It is the yardstick the fast `protocol.decoder.Decoder` is proven against (same events, same
statistics, for any input and any cuts), and the simplest reading of PROTOCOL.md in code.
"""

from __future__ import annotations

from protocol.events import BoardInfo, Event, LinkStats
from protocol.framing import MAX_LINE_BYTES, Framer
from protocol.plainforms import Form
from protocol.rules import LineRules


class PlainDecoder:
    """One line at a time; the state (framer, rules, statistics) the fast decoder shares."""

    def __init__(self, max_line_bytes: int = MAX_LINE_BYTES) -> None:
        self.max_line_bytes = max_line_bytes
        self._framer = Framer(max_line_bytes)
        self._rules = LineRules(max_line_bytes)

    @property
    def stats(self) -> LinkStats:
        return self._rules.stats

    @property
    def info(self) -> BoardInfo | None:
        return self._rules.info

    @property
    def channels(self) -> int | None:
        return self._rules.channels

    @property
    def form(self) -> Form | None:
        """The plain form unsequenced data lines are read in (None until one is decided)."""
        return self._rules.form

    @property
    def holding(self) -> int:
        """Data lines held back while a plain form is decided (0 when none are)."""
        return self._rules.holding

    def flush_hold(self, t_s: float) -> list[Event]:
        """Decide the plain form on the data lines held so far and return every held line's events.

        For the end of a capture (fewer than 8 data lines would otherwise stay held), or a caller that
        will not wait longer for a slow board. The form is then decided on fewer lines than usual.
        """
        rules = self._rules
        rules.begin(t_s)
        while rules.holding:
            rules.end_hold()
        return rules.take_events()

    @property
    def buffered_bytes(self) -> int:
        """Bytes of an unfinished line held for the next feed (never more than max_line_bytes)."""
        return self._framer.buffered_bytes

    @property
    def first_unreadable(self) -> bytes | None:
        """The first line since `clear_unreadable()` that could not be read as data, or None."""
        return self._rules.first_unreadable

    def clear_unreadable(self) -> None:
        self._rules.first_unreadable = None

    def drop_partial(self) -> int:
        """Forget an unfinished line, so bytes from before a reconnect never join bytes after it."""
        return self._framer.drop_partial()

    def feed(self, data: bytes, t_s: float) -> list[Event]:
        rules = self._rules
        rules.begin(t_s)
        rules.stats.bytes_in += len(data)
        complete, overlong = self._framer.push(bytes(data))
        if complete:
            for line in complete[:-1].split(b"\n"):
                rules.line(line)
        if overlong:
            rules.overlong()
        return rules.take_events()
