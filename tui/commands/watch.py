"""`padtune watch PORT_OR_URL`: the live screen on a real serial port (or any pyserial URL)."""

from __future__ import annotations

import argparse

from tui.headless.ports import DEFAULT_BAUD, baud_note
from tui.live import check_baud, check_profile_arg, run_live
from tui.polarity_arg import add_polarity_arg


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("watch", help="open the live screen on a serial port or URL",
                       description="Open the live tuning screen on a serial port (/dev/ttyACM0, COM3) or a "
                       "pyserial URL (sim://greenhouse, socket://host:port).")
    p.add_argument("port", metavar="PORT_OR_URL", help="serial device path or URL")
    p.add_argument("--baud", type=int, default=None, help="baud rate (default 115200; no effect on socket://)")
    p.add_argument("--profile", help="profile TOML file to load settings from")
    add_polarity_arg(p)
    p.add_argument("--press-keys", action="store_true",
                   help="the board takes +KEY / -KEY lines (a simulated board on a pseudo-terminal): let "
                   "keys 1-9, 0, p and t press its keys")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    baud = DEFAULT_BAUD if args.baud is None else check_baud(args.baud)
    note = baud_note(args.port, args.baud)  # shown in the screen's log: stderr is the screen's
    return run_live(args.port, baud, check_profile_arg(args.profile),
                    demo=args.press_keys or args.port.startswith("sim://"), notices=[note] if note else [],
                    polarity=args.polarity)
