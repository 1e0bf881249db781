"""Where Python `logging` records go in a padtune process: stderr, one `padtune: ...` line each.

The link and the recorder log through `logging` (INFO for what front ends already tell in their own
words; ERROR with a traceback for a bug caught on a thread). Without a handler, Python's last-resort
handler would print WARNING and above bare (no `padtune:` prefix, a traceback over many lines, control
characters from a board's line as they came). This handler prints each record as one escaped line; the
traceback only when PADTUNE_DEBUG is set in the environment.
"""

from __future__ import annotations

import logging
import os
import sys

from protocol.printable import printable

DEBUG_ENV = "PADTUNE_DEBUG"


class OneLineHandler(logging.Handler):
    """A record as `padtune: message` on stderr (the exception's type and words added in brackets)."""

    def emit(self, record: logging.LogRecord) -> None:
        try:
            text = record.getMessage()
            if record.exc_info and record.exc_info[1] is not None:
                exc = record.exc_info[1]
                text += f" ({type(exc).__name__}: {exc}; set {DEBUG_ENV}=1 for the details)"
            stream = sys.stderr
            stream.write(f"padtune: {printable(text, double_backslash=False)}\n")
            if os.environ.get(DEBUG_ENV) and record.exc_info:
                stream.write(logging.Formatter().formatException(record.exc_info) + "\n")
            stream.flush()
        except Exception:  # logging must never raise into the code that logged; logging's own report
            self.handleError(record)


def install(level: int = logging.WARNING) -> OneLineHandler:
    """Route every logger's records at `level` and above through one `OneLineHandler` (idempotent)."""
    root = logging.getLogger()
    for handler in root.handlers:
        if isinstance(handler, OneLineHandler):
            return handler
    handler = OneLineHandler(level)
    root.addHandler(handler)
    if root.level == logging.NOTSET or root.level > level:
        root.setLevel(level)
    return handler
