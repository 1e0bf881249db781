"""`-` as a file name on the command line: standard output where a command writes one file, else refused.

A command that writes exactly one file whose content is its whole result (`export`) takes `-` for
standard output, as Unix tools do. Everywhere else a file named `-` would only be made by mistake: the
command's own output already goes to standard output (`tune`, `check`, `lot` print their tables there),
or the file must be one that can be flushed, synced and found again (`record`, `monitor --record`, a
results database, `sim --link` and `--flash`). There `-` is refused by name before anything runs.
(A file really called `-` is still reachable as `./-`.)
"""

from __future__ import annotations

from protocol.errors import UserError

STDOUT = "-"
HELP_STDOUT = "`-` writes to standard output"
HELP_NO_DASH = "`-` is refused: name a file (./- for a file called -)"


def is_stdout(name: str | None) -> bool:
    return name == STDOUT


def refuse_dash(option: str, name: str | None, why: str) -> None:
    """UserError naming `option -` and why it cannot be standard output; nothing when `name` is not `-`."""
    if name == STDOUT:
        raise UserError(f"{option} -: {why}; name a file (./- for a file called -)")
