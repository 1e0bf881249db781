"""Makes untrusted text safe to print on a terminal: names, keys and lines taken from files and boards.

A profile key, a board's info line or a garbled line may hold ESC sequences, NUL, newlines or other
control characters; printed raw they move the cursor, recolour the screen or forge extra lines. Every
message that quotes such text passes it through `printable` first. Escapes are written the way Python
writes them in a string literal (`\\x1b`, `\\n`), so a reader can tell exactly which byte was there.
"""

from __future__ import annotations

_NAMED = {"\n": "\\n", "\r": "\\r", "\t": "\\t", "\\": "\\\\"}


def _escape(ch: str) -> str:
    named = _NAMED.get(ch)
    if named is not None:
        return named
    code = ord(ch)
    if code <= 0xFF:
        return f"\\x{code:02x}"
    if code <= 0xFFFF:
        return f"\\u{code:04x}"
    return f"\\U{code:08x}"


def printable(text: str, limit: int | None = None, *, double_backslash: bool = True) -> str:
    """`text` with every control or unprintable character escaped; cut to `limit` characters with `...`.

    Letters of any script stay as they are (a key named in Greek prints as Greek); C0 and C1 controls,
    DEL, the line and paragraph separators and unassigned or format characters are escaped. A backslash
    is doubled, so an escape in the output always means an escaped character; a whole message whose
    quoted parts were escaped already passes `double_backslash=False` (its last guard on the way out).
    """
    keep = "" if double_backslash else "\\"
    if text.isprintable() and ("\\" not in text or keep):
        shown = text
    else:
        shown = "".join(ch if (ch.isprintable() and ch != "\\") or ch == keep else _escape(ch)
                        for ch in text)
    if limit is not None and len(shown) > limit:
        return shown[: max(limit - 3, 0)] + "..."
    return shown
