"""`padtune sim BOARD`: serve a simulated board on a pseudo-terminal (prints the path) until Ctrl-C.

`padtune sim --list` lists the bundled boards. The first line printed is the device path alone, so a
script can take it with `head -1`; the board stays on that path until stopped.
"""

from __future__ import annotations

import argparse
import math
import os
import signal
import sys
import time

from devices.boards import list_boards, load_board
from devices.faults import SYNTAX, FaultPlan
from devices.protocol_sim import flash_at
from devices.pty_link import make_link, remove_link
from devices.pty_server import PtyServer
from devices.simulator import SimBoard
from protocol.errors import UserError
from tui.dash import refuse_dash


def register(subparsers: argparse._SubParsersAction) -> None:
    p = subparsers.add_parser(
        "sim", help="serve a simulated board on a pseudo-terminal",
        description="Serve a simulated board on a pseudo-terminal and print its path, so any program can "
        "connect to it as to hardware. Write '+PAD' / '-PAD' lines to the port to press and release keys, "
        "'?' for the info line. Ctrl-C stops. (The same boards open directly as sim://BOARD URLs.)",
    )
    p.add_argument("board", nargs="?", help="board name (see --list) or path to a board .toml file")
    p.add_argument("--list", action="store_true", help="list the bundled boards and exit")
    p.add_argument("--seed", type=int, default=0, help="random seed; a seed repeats exactly (default 0)")
    p.add_argument("--speed", type=float, default=1.0, help="time factor: 4 runs 4x faster (default 1)")
    p.add_argument("--fault", action="append", default=[], metavar="ITEM", help=f"inject a fault: {SYNTAX}")
    p.add_argument("--no-checksum", action="store_true", help="send lines without checksums")
    p.add_argument("--no-script", action="store_true", help="no scripted touches (only your key presses)")
    p.add_argument("--states", action="store_true",
                   help="send the board's own key states with every frame (its detector: the C library)")
    p.add_argument("--random", type=float, metavar="PER_MIN", help="random touches per minute")
    p.add_argument("--flash", metavar="PATH", help="keep the board's kept settings (section 7's `keep`) in "
                   "this file, so they survive this process too (`-` is refused)")
    p.add_argument("--no-settings", action="store_true",
                   help="a board that does not take settings commands (no settings=1 in its info line)")
    p.add_argument("--link", metavar="PATH",
                   help="also make a symlink PATH to the device (removed on exit; a stale link left by a "
                   "killed sim is replaced; a file or a live link is refused; `-` is refused)")
    p.add_argument("--duration", type=float, metavar="S", help="stop after S seconds of wall time")
    p.set_defaults(func=run)


def _say(text: str) -> None:
    """Print a status line; if whoever read our output has gone (`| head -1`), keep serving quietly."""
    try:
        print(text, flush=True)
    except BrokenPipeError:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())  # so the interpreter's last flush cannot fail either
        os.close(devnull)


def list_text() -> list[str]:
    lines = []
    for name in list_boards():
        spec = load_board(name)
        lines.append(f"{name:<12} {spec.channels:>3} ch  {spec.rate_hz:>6g} Hz  {spec.method.kind:<12}  "
                     f"{spec.description}")
    return lines


def run(args: argparse.Namespace) -> int:
    if args.list:
        print("\n".join(list_text()))
        return 0
    if not args.board:
        raise UserError("name a board to serve, e.g. `padtune sim greenhouse` (see `padtune sim --list`)")
    if args.duration is not None and not 0 < args.duration < math.inf:  # also refuses nan
        raise UserError(f"--duration must be a number of seconds above zero, got {args.duration:g}")
    refuse_dash("--link", args.link, "the link is a path other programs open as the board's port")
    refuse_dash("--flash", args.flash, "the kept settings are a file the board reads back at its next start")
    flash = flash_at(args.flash) if args.flash else None
    board = SimBoard(args.board, seed=args.seed, speed=args.speed, faults=FaultPlan.parse(args.fault),
                     checksum=not args.no_checksum, script=not args.no_script, random_per_min=args.random,
                     settings=not args.no_settings, flash=flash, states=args.states)
    server = PtyServer(board)
    if args.link:
        make_link(server, args.link)
    _announce(board, server, args)
    _serve(server, args)
    s = server.stats
    print(f"  stopped: {board.injected.frames_sent} frames, {s.bytes_sent} bytes sent, {s.connects} "
          f"connection(s)" + (f", {s.bytes_dropped} bytes dropped (client not reading)" if s.bytes_dropped
                               else ""), file=sys.stderr, flush=True)
    return 0


def _announce(board: SimBoard, server: PtyServer, args: argparse.Namespace) -> None:
    spec = board.spec
    _say(server.path)  # alone on the first line, for `head -1`
    faults = f", faults: {', '.join(args.fault)}" if args.fault else ""
    _say(f"  {spec.name}: {spec.channels} channels at {spec.rate_hz:g} Hz, {spec.method.kind}, seed "
         f"{args.seed}, speed {args.speed:g}x{faults}")
    _say(f"  keys: {', '.join(spec.names)}; write +KEY / -KEY lines to press and release. Ctrl-C stops.")


def _serve(server: PtyServer, args: argparse.Namespace) -> None:
    """Serve until Ctrl-C, SIGTERM or --duration; then close the pty and remove the --link."""
    end = None if args.duration is None else time.monotonic() + args.duration
    stopping = False

    def stop_now(*_: object) -> None:
        nonlocal stopping
        stopping = True

    def report(connected: bool) -> None:
        _say(f"  client {'connected' if connected else 'disconnected'}")

    old = signal.signal(signal.SIGTERM, stop_now)
    try:
        server.serve(lambda: stopping or (end is not None and time.monotonic() >= end), report)
    except KeyboardInterrupt:
        pass  # Ctrl-C is how a user stops the server: not an error
    finally:
        signal.signal(signal.SIGTERM, old)
        server.close()
        if args.link:
            remove_link(args.link, server.path)
