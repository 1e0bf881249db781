"""`padtune sim BOARD`: serve a simulated board on a pseudo-terminal (prints the path) until Ctrl-C.

`padtune sim --list` lists the bundled boards. The first line printed is the device path alone, so a
script can take it with `head -1`; the board stays on that path until stopped.
"""

from __future__ import annotations

import argparse
import contextlib
import math
import os
import signal
import sys
import time

from devices.boards import list_boards, load_board
from devices.faults import SYNTAX, FaultPlan
from devices.protocol_sim import flash_at
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


def _make_link(server: PtyServer, link: str) -> None:
    """The stable symlink of --link; a path that cannot be made is a one-line mistake.

    A link left by a `padtune sim` that was killed (kill -9 leaves it: its pty is gone) is replaced;
    so is one that points at this server's own new pty (the number was free again). A regular file, a
    folder, or a link to anything else that exists (a live pty: another server is using the path) is
    refused by name and left as it is.
    """
    try:
        refuse = _link_refusal(link, server.path)
    except OSError as exc:
        refuse = f"--link {link}: cannot look at it ({exc.strerror}); pick another path"
    if refuse is not None:
        server.close()
        raise UserError(refuse)
    tmp = os.path.join(os.path.dirname(link) or ".", f".{os.path.basename(link)}.{os.getpid()}.tmp")
    try:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        os.symlink(server.path, tmp)
        os.replace(tmp, link)  # over a stale link in one step: the path never points nowhere twice
    except OSError as exc:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        server.close()
        raise UserError(f"--link {link}: cannot make the link ({exc.strerror}); pick a path in a folder "
                        "you can write") from None


def _link_refusal(link: str, own_pty: str) -> str | None:
    """Why `link` may not be replaced by --link, or None when it is free or a stale link."""
    if not os.path.lexists(link):
        return None
    if not os.path.islink(link):
        kind = "a folder" if os.path.isdir(link) else "a file" if os.path.isfile(link) else "not a link"
        return f"--link {link} already exists and is {kind}, not a link; pick another path or remove it"
    target = os.readlink(link)
    if not os.path.isabs(target):
        target = os.path.join(os.path.dirname(link), target)
    pty = target.startswith("/dev/pts/")
    if pty and (not os.path.exists(target) or target == own_pty):
        return None  # its pty went with its killed server (or is this server's, the number free again)
    if pty and _served_by_a_linking_sim(target) is False:
        return None  # the number was taken again by a program that serves no link: the link is stale
    if pty:
        return (f"--link {link} points to {target}, a pseudo-terminal in use (another padtune sim?); stop "
                "that server or pick another path")
    what = "nothing (a dangling link)" if not os.path.lexists(target) else target
    return f"--link {link} is a link to {what}, not to a padtune sim; pick another path or remove it"


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
        _make_link(server, args.link)
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
            _remove_link(args.link, server.path)


def _served_by_a_linking_sim(pty: str) -> bool | None:
    """Whether the process holding the master of `/dev/pts/N` was started with `--link` (a server that
    may own the link), False when its holder(s) were not, None when that cannot be told (no /proc, or
    another user's processes): then the link counts as live and is left alone."""
    number = pty.rsplit("/", 1)[-1]
    holders: list[str] = []
    try:
        pids = [p for p in os.listdir("/proc") if p.isdigit()]
    except OSError:
        return None
    for pid in pids:
        try:
            fds = os.listdir(f"/proc/{pid}/fd")
        except OSError:
            continue  # gone, or not ours to look at
        for fd in fds:
            try:
                if not os.readlink(f"/proc/{pid}/fd/{fd}").endswith("ptmx"):
                    continue
                with open(f"/proc/{pid}/fdinfo/{fd}", encoding="ascii") as f:
                    if f"tty-index:\t{number}\n" in f.read():
                        holders.append(pid)
            except OSError:
                continue
    if not holders:
        return None
    for pid in holders:
        try:
            with open(f"/proc/{pid}/cmdline", "rb") as f:
                if b"\0--link\0" in f.read():
                    return True
        except OSError:
            return None
    return False


def _remove_link(link: str, own_pty: str) -> None:
    """Remove --link if it still points to this server's pty (the user may have removed or reused it)."""
    with contextlib.suppress(OSError):
        if os.readlink(link) == own_pty:
            os.unlink(link)
