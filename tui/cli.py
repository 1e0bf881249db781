"""The `padtune` command line: finds the subcommands, runs one, and turns user mistakes into exit codes.

Each subcommand lives in its own module under `tui/commands/` and exposes
`register(subparsers) -> None`, which adds its parser and sets `func=callable(args) -> int`.
Modules are discovered, so adding a command never means editing this file.

Exit codes: 0 success, 1 a failed check, 2 a usage or input error (one line on stderr, no traceback).
"""

from __future__ import annotations

import argparse
import importlib
import pkgutil
import sys
from collections.abc import Sequence
from typing import NoReturn

import devices
from protocol.printable import printable
from tui import commands, loglines
from tui.errors import UserError
from tui.polarity_arg import glue_polarity
from tui.version import padtune_version


class OneLineParser(argparse.ArgumentParser):
    """An argparse parser whose usage errors are one line that points at `--help` (exit 2)."""

    def error(self, message: str) -> NoReturn:
        self.exit(2, f"{self.prog}: {message} (see '{self.prog} --help')\n")


def build_parser(command: str | None = None) -> argparse.ArgumentParser:
    """The whole command line; with `command` (the first word typed) only that command's module is
    imported when one of that name registers it (a faster start: `replay` does not import `check`'s)."""
    names = sorted(m.name for m in pkgutil.iter_modules(commands.__path__) if not m.name.startswith("_"))
    if command in names:
        parser, sub = _parser()
        importlib.import_module(f"{commands.__name__}.{command}").register(sub)
        if command in sub.choices:
            return parser
    parser, sub = _parser()
    for name in names:
        importlib.import_module(f"{commands.__name__}.{name}").register(sub)
    return parser


def _parser() -> tuple[argparse.ArgumentParser, argparse._SubParsersAction]:
    parser = OneLineParser(
        prog="padtune",
        description="Bring up and tune capacitive touch keys live over a serial port.",
    )
    parser.add_argument("--version", action="version", version=f"padtune {padtune_version()}",
                        help="print padtune's version and exit")
    return parser, parser.add_subparsers(dest="command", metavar="COMMAND")


def main(argv: Sequence[str] | None = None) -> int:
    devices.register_url_handlers()
    loglines.install()  # no library's logging line reaches the terminal bare
    words = glue_polarity(sys.argv[1:] if argv is None else argv)
    parser = build_parser(words[0] if words else None)
    args = parser.parse_args(words)
    func = getattr(args, "func", None)
    if func is None:
        # `padtune` alone opens the port picker when the TUI provides one, else shows the help.
        func = getattr(commands, "default_command", None)
        if func is None:
            parser.print_help()
            return 2
    try:
        return int(func(args) or 0)
    except UserError as exc:
        # The last guard: a message quoting a file or a board never reaches the terminal as control codes.
        # A message listing several problems keeps its own line breaks (one problem per line).
        lines = (printable(line, double_backslash=False) for line in str(exc).split("\n"))
        print("padtune: " + "\n".join(lines), file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        return 130


if __name__ == "__main__":
    sys.exit(main())
