"""`padtune pull PORT -o PROFILE.toml`: read the settings a board holds into a profile."""

from __future__ import annotations

import argparse
import os
import stat
from pathlib import Path

from processing.board_settings import profile_from_board_values
from processing.profile import save_profile
from protocol.errors import UserError
from tui.headless.board_link import connect, read_board
from tui.headless.ports import add_port_args


def register(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser(
        "pull", help="read the settings a board holds into a profile (boards that say settings=1)",
        description="Ask a board that takes settings commands (PROTOCOL.md section 7) for every channel's "
        "settings and write them as a profile. Exit 0 when written, 1 when the board did not answer, "
        "2 for usage and input errors (a board without settings=1 among them).")
    add_port_args(p)
    p.add_argument("-o", "--output", metavar="PROFILE.toml", required=True,
                   help="the profile to write (an existing one is replaced atomically, kept as .bak)")
    p.set_defaults(func=run)


def check_output(text: str) -> Path:
    """Where a profile may be written, or a UserError that says why not (never a device or a folder)."""
    path = Path(text).expanduser()
    folder = path.resolve().parent
    if not folder.is_dir():
        raise UserError(f"{path}: the folder {folder} does not exist")
    if path.exists() or path.is_symlink():
        try:
            mode = os.stat(path).st_mode
        except OSError as exc:
            raise UserError(f"{path}: cannot use it: {exc.strerror or exc}") from None
        if stat.S_ISDIR(mode):
            raise UserError(f"{path}: is a folder; name a profile file")
        if not stat.S_ISREG(mode):
            raise UserError(f"{path}: is not a regular file (a device, a pipe?); refusing to replace it")
    return path


def run(args: argparse.Namespace) -> int:
    target = check_output(args.output)
    board = connect(args.port, args.baud)
    try:
        values, result = read_board(board)
    finally:
        board.link.stop()
    if not result.applied:
        print(f"padtune pull: {board.name}: {result.describe()}")
        return 1
    try:
        profile = profile_from_board_values(board.info, values)
    except ValueError as exc:
        print(f"padtune pull: {board.name}: {exc}")
        return 1
    save_profile(profile, target)  # atomic; ProfileError (a UserError) says why it was not written
    overrides = len(profile.overrides)
    print(f"wrote {target}: {profile.channels} channels from {board.name}"
          f"{f' ({overrides} with their own settings)' if overrides else ''}")
    return 0
