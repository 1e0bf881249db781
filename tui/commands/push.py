"""`padtune push PROFILE.toml PORT [--keep]`: write a profile's settings to a board, then verify."""

from __future__ import annotations

import argparse

from processing.board_settings import differences, push_lines
from protocol.commands import KEEP_LINE
from protocol.errors import UserError
from tui.headless.board_link import connect, read_board
from tui.headless.ports import add_port_args, load_profile_arg


def register(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser(
        "push", help="write a profile's settings to a board and read them back (boards that say settings=1)",
        description="Send every channel's settings of a profile to a board that takes settings commands "
        "(PROTOCOL.md section 7), keep them across power cycles with --keep, then read them back. Exit 0 "
        "when the board holds the profile, 1 when it refused a setting or holds something else (each "
        "difference one line), 2 for usage and input errors (a board without settings=1 among them).")
    p.add_argument("profile", metavar="PROFILE.toml", help="the profile to send")
    add_port_args(p)
    p.add_argument("--keep", action="store_true", help="also make the board keep them across power cycles")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    profile = load_profile_arg(args.profile)
    assert profile is not None
    board = connect(args.port, args.baud)
    try:
        return _push(board, profile, args.keep)
    finally:
        board.link.stop()


def _push(board, profile, keep: bool) -> int:
    channels = board.info.channels
    if channels != profile.channels:
        raise UserError(f"{board.port}: {board.name} has {channels} channels, the profile "
                        f"{profile.channels}; pull a profile from this board first (padtune pull)")
    names = tuple(board.info.names)
    if names and names != profile.names:
        print(f"padtune push: note: channel names differ (board: {','.join(names[:4])}..., profile: "
              f"{','.join(profile.names[:4])}...); settings go by channel number")
    failed = [r for r in board.run(push_lines(profile)) if not r.applied]
    for result in failed:
        print(f"padtune push: {board.name}: {result.describe()}")
    if keep and not failed:
        kept = board.run([KEEP_LINE])[0]
        if not kept.applied:
            failed.append(kept)
            print(f"padtune push: {board.name}: {kept.describe()}")
    elif keep:
        print(f"padtune push: {board.name}: not kept: the board refused or missed a setting")
    values, result = read_board(board)
    if not result.applied:
        print(f"padtune push: {board.name}: reading back: {result.describe()}")
        return 1
    found = differences(profile, values)
    for diff in found:
        print(f"padtune push: {diff.line()}")
    if failed or found:
        return 1
    what = "written and kept" if keep else "written (not kept: add --keep to survive a power cycle)"
    print(f"{board.name} holds {profile.channels} channels of settings from the profile: {what}")
    return 0
