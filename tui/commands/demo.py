"""`padtune demo`: the live screen on a simulated board (the greenhouse irrigation panel by default)."""

from __future__ import annotations

import argparse

from tui.live import check_baud, check_profile_arg, run_live
from tui.polarity_arg import add_polarity_arg


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("demo", help="open the live screen on a simulated board",
                       description="Open the live tuning screen on a simulated board (the greenhouse "
                       "irrigation panel unless --board says otherwise). Keys 1-9 and 0 hold and let go "
                       "of the board's keys; ? lists every key.")
    p.add_argument("--board", default="greenhouse",
                   help="simulated board name or TOML file (default greenhouse)")
    p.add_argument("--seed", type=int, default=1, help="noise seed of the simulated board (default 1)")
    p.add_argument("--speed", type=float, default=1.0, help="simulated time per real second (default 1)")
    p.add_argument("--no-script", action="store_true",
                   help="no scripted touches: only the keys you press from the keyboard")
    p.add_argument("--profile", help="profile TOML file to load settings from")
    add_polarity_arg(p)
    p.add_argument("--baud", type=int, default=115200, help="baud rate (default 115200)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from tui.demo_profile import demo_profile

    url = f"sim://{args.board}?seed={args.seed}"
    if args.speed != 1.0:
        url += f"&speed={args.speed:g}"
    if args.no_script:
        url += "&script=0"
    profile_path = check_profile_arg(args.profile)
    start = None if profile_path else demo_profile(args.board)
    return run_live(url, check_baud(args.baud), profile_path, demo=True, start_profile=start,
                    polarity=args.polarity)
