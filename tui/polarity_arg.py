"""`--polarity` for the commands that run detection (monitor, replay, watch, demo): parsing and help.

`+` (counts rise on touch) or `-` (they fall) for every channel, or a comma list with one sign per
channel (`+,-,+`). Given, no channel learns its direction from its first touch; a count that does not
match the board's channels is told once when the board is known, and learning goes on.
"""

from __future__ import annotations

import argparse
from collections.abc import Sequence

POLARITY_HELP = ("which way counts move on touch: + (rise) or - (fall) for every channel, or one per channel "
                 "(+,-,+; write --polarity=-,+ when the list starts with -). Default: the board's info "
                 "line, else the profile, else learned from each key's first touch")
_WORDS = {"+": 1, "-": -1}


def polarity_type(text: str) -> tuple[int, ...]:
    """argparse type: `+`, `-` or a comma list of them, to signs (+1 / -1)."""
    signs = []
    for part in text.split(","):
        word = part.strip()
        if word not in _WORDS:
            what = repr(word) if word else "an empty entry"
            raise argparse.ArgumentTypeError(f"{text!r}: {what} is not + or - (give + or - for every "
                                             "channel, or one per channel: +,-,+)")
        signs.append(_WORDS[word])
    return tuple(signs)


def add_polarity_arg(p: argparse.ArgumentParser) -> None:
    p.add_argument("--polarity", metavar="SIGNS", type=polarity_type, default=(), help=POLARITY_HELP)


def glue_polarity(argv: Sequence[str]) -> list[str]:
    """`--polarity -,+` as `--polarity=-,+`: argparse takes a value starting with `-` for an option."""
    out: list[str] = []
    it = iter(argv)
    for arg in it:
        if arg == "--polarity":
            value = next(it, None)
            if value is not None and value.startswith("-") and not value.startswith("--") \
                    and (len(value) == 1 or value[1] in "+, " or set(value) <= set("+-, ")):
                out.append(f"--polarity={value}")
                continue
            out.append(arg)
            if value is not None:
                out.append(value)
            continue
        out.append(arg)
    return out
