"""Noticing a wrong baud rate: within the first two seconds after opening, are most bytes not text?

At the wrong rate a UART delivers mostly bytes outside printable ASCII (framing errors give 0x00,
0x80, 0xF8, 0xFE...). So a byte counts as garbage when it is not printable ASCII, tab, CR or LF, and
only the bytes decide: a stream of readable text in a form padtune does not read is not a baud
problem (`protocol.linkwatch` says what it is instead). The threshold is common practice, no
source: more than half of at least 32 bytes.
"""

from __future__ import annotations

WINDOW_S = 2.0
MIN_BYTES = 32
_PRINTABLE = bytes([9, 10, 13, *range(0x20, 0x7F)])


class BaudCheck:
    """Feed it every chunk of the window; the verdict is True (suspect), False, or None (undecided)."""

    def __init__(self, opened_at_s: float) -> None:
        self.opened_at_s = opened_at_s
        self.bytes = 0
        self.garbage_bytes = 0
        self.decided: bool | None = None

    def feed(self, data: bytes, now_s: float) -> bool | None:
        """Count a chunk read at `now_s`; returns the verdict once the window has passed."""
        if self.decided is not None:
            return self.decided
        if now_s - self.opened_at_s <= WINDOW_S:
            self.bytes += len(data)
            self.garbage_bytes += len(data.translate(None, _PRINTABLE))
            return None
        return self.finish()

    def finish(self) -> bool:
        self.decided = self.bytes >= MIN_BYTES and self.garbage_bytes * 2 > self.bytes
        return self.decided

    def _counts(self) -> str:
        return (f"{self.garbage_bytes} of {self.bytes} bytes in the first {WINDOW_S:.0f} s were not text "
                "(control or high-bit bytes)")

    def describe(self, baud: int) -> str:
        """The advice for a serial port (a device path, or rfc2217:// which sets the remote rate)."""
        return (f"baud rate {baud} is probably wrong: {self._counts()}; try the board's rate "
                "(9600, 57600, 115200 and 921600 are common), or check the wiring and ground")

    def describe_network(self, port: str) -> str:
        """The same finding on a link with no baud rate of its own (socket://): say what can be true."""
        return (f"{port} sends mostly binary: {self._counts()}; a network link has no baud rate here: the "
                "bridge may speak its own protocol (for RFC 2217 use rfc2217://), or its serial side is set "
                "to a rate other than the board's")
