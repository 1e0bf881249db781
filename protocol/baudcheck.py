"""Noticing a wrong baud rate: within the first two seconds after opening, are most bytes garbage?

At the wrong rate a UART delivers mostly bytes outside printable ASCII (framing errors give 0x00,
0x80, 0xF8, 0xFE...), and what lines do form rarely parse. So a byte counts as garbage when it is not
printable ASCII, tab, CR or LF, and the verdict also looks at the lines the decoder had to drop.
The thresholds are common practice, no source: more than half of at least 32 bytes, or more than
half of at least 4 lines.
"""

from __future__ import annotations

from protocol.events import LinkStats

WINDOW_S = 2.0
MIN_BYTES = 32
MIN_LINES = 4
_PRINTABLE = bytes([9, 10, 13, *range(0x20, 0x7F)])


def _bad_lines(stats: LinkStats) -> int:
    return stats.garbled + stats.overlong + stats.bad_checksum


def _good_lines(stats: LinkStats) -> int:
    return stats.frames + stats.infos + stats.notes + stats.width_mismatch


class BaudCheck:
    """Feed it every chunk of the window; `verdict()` is True (suspect), False, or None (undecided)."""

    def __init__(self, opened_at_s: float, stats: LinkStats) -> None:
        self.opened_at_s = opened_at_s
        self.bytes = 0
        self.garbage_bytes = 0
        self._bad0 = _bad_lines(stats)
        self._good0 = _good_lines(stats)
        self._bad = 0
        self._good = 0
        self.decided: bool | None = None

    def feed(self, data: bytes, now_s: float, stats: LinkStats) -> bool | None:
        """Count a chunk read at `now_s`; returns the verdict once the window has passed."""
        if self.decided is not None:
            return self.decided
        if now_s - self.opened_at_s <= WINDOW_S:
            self.bytes += len(data)
            self.garbage_bytes += len(data.translate(None, _PRINTABLE))
            self._bad = _bad_lines(stats) - self._bad0
            self._good = _good_lines(stats) - self._good0
            return None
        return self.finish()

    def finish(self) -> bool:
        bytes_say = self.bytes >= MIN_BYTES and self.garbage_bytes * 2 > self.bytes
        lines = self._bad + self._good
        lines_say = lines >= MIN_LINES and self._bad * 2 > lines
        self.decided = bytes_say or lines_say
        return self.decided

    def describe(self, baud: int) -> str:
        return (
            f"baud rate {baud} is probably wrong: {self.garbage_bytes} of {self.bytes} bytes and "
            f"{self._bad} of {self._bad + self._good} lines in the first {WINDOW_S:.0f} s were garbage; "
            "try the board's rate"
        )
