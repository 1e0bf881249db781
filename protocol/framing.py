"""Cutting a byte stream into complete lines with bounded memory (shared by both decoders).

LF, CRLF and a lone CR all end a line: a CR is turned into an LF on the way in, so a CRLF becomes a
line and an empty one (empty lines are ignored), and the rest of the decoder only ever sees LF.
The framer holds at most `max_line_bytes` of an unfinished line. A line that grows past the limit
before its end is reported once as overlong and everything up to the next line end is skipped, so
memory stays bounded whatever arrives, and the result never depends on where the stream was cut.
"""

from __future__ import annotations

# The longest line, its line end not counted: 512 channels of 32-bit values fit with room to spare
# ("@65535 " + 512 x "-2147483648 " + "*HHHH" + CRLF is 6157 bytes; PROTOCOL.md, section 1).
MAX_LINE_BYTES = 8192


class Framer:
    def __init__(self, max_line_bytes: int = MAX_LINE_BYTES) -> None:
        self.max_line_bytes = max_line_bytes
        self._partial = b""
        self._skipping = False

    @property
    def buffered_bytes(self) -> int:
        return len(self._partial)

    def push(self, data: bytes) -> tuple[bytes, bool]:
        """Take more bytes; return (complete lines ending in LF, whether a new overlong tail began).

        The caller handles the complete lines first, then reports the overlong tail if there is one.
        """
        if b"\r" in data:
            # CRLF first, so a CRLF stream costs no empty lines; a lone CR (or a CRLF cut between two
            # chunks) becomes an LF, at worst leaving an empty line behind.
            data = data.replace(b"\r\n", b"\n").replace(b"\r", b"\n")
        if self._skipping:
            lf = data.find(b"\n")
            if lf < 0:
                return b"", False
            self._skipping = False
            data = data[lf + 1 :]
        if self._partial:
            data = self._partial + data
        last = data.rfind(b"\n")
        complete, tail = (b"", data) if last < 0 else (data[: last + 1], data[last + 1 :])
        if len(tail) > self.max_line_bytes:
            self._partial, self._skipping = b"", True
            return complete, True
        self._partial = tail
        return complete, False

    def drop_partial(self) -> int:
        """Forget an unfinished line (the link calls this when the port went away mid-line)."""
        dropped = len(self._partial)
        self._partial, self._skipping = b"", False
        return dropped
