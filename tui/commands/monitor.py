"""`padtune monitor PORT_OR_URL`: live detection without the full screen (lines, or JSON Lines)."""

from __future__ import annotations

import argparse
import time

from processing.recording import check_recording_target
from processing.session import Session
from tui.commands.record import DASH_WHY
from tui.dash import HELP_NO_DASH, refuse_dash
from tui.headless.output import make_output
from tui.headless.ports import (
    StopFlag,
    add_port_args,
    load_profile_arg,
    open_link,
    quiet_broken_pipe,
    seconds,
    stop_on_recording_error,
)
from tui.headless.runner import DetectionRun, never_spoke
from tui.pipeline import Pipeline
from tui.polarity_arg import add_polarity_arg


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "monitor", help="live detection as text lines or JSON Lines (no full screen)",
        description="Run detection on a board and print touches, releases and link events as they happen: "
        "readable lines on a terminal, plain text when piped, JSON Lines with --json (see README, "
        "'Headless use'). Ends after --duration, on Ctrl-C or SIGTERM, always with a summary.")
    add_port_args(p)
    p.add_argument("--profile", metavar="F", help="profile TOML with the detection settings")
    add_polarity_arg(p)
    p.add_argument("--json", action="store_true", help="write JSON Lines (one object per line)")
    p.add_argument("--duration", metavar="S", type=seconds,
                   help="stop after S seconds (default: run until stopped)")
    p.add_argument("--every", metavar="S", type=seconds,
                   help="print a status of every channel every S seconds")
    p.add_argument("--record", metavar="FILE",
                   help="also write a recording (CSV) of the same run to FILE (a regular file; "
                   f"{HELP_NO_DASH})")
    p.add_argument("--force", action="store_true", help="with --record: overwrite FILE if it exists")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    return quiet_broken_pipe(lambda: _run(args))


def _run(args: argparse.Namespace) -> int:
    refuse_dash("--record", args.record, DASH_WHY)
    if args.record:
        check_recording_target(args.record, overwrite=args.force)  # before the port is opened
    profile = load_profile_arg(args.profile)
    clock = time.monotonic
    origin = clock()  # before the link starts, so its first events have t >= 0
    link = open_link(args.port, args.baud, clock)
    run_ = DetectionRun(Session(profile, polarity=args.polarity), make_output(args.json), origin_t_s=origin,
                        every_s=args.every, link_warnings=True)
    pipeline = Pipeline(link, run_.session, feed=run_.feed, clock=clock, source=args.port)
    try:
        if args.record:
            pipeline.start_recording(args.record, origin_t_s=origin, overwrite=args.force)
    except BaseException:
        link.stop()
        raise
    until = None if args.duration is None else origin + args.duration
    with StopFlag() as stop:
        last = pipeline.run_to_end(until_s=until, stop=stop, on_step=stop_on_recording_error)
    stats = link.stats
    silence = never_spoke(stats, args.port, last.t_s - origin)
    if silence is not None:
        run_.silent_s = last.t_s - origin
        if not stats.extra.get("stalls"):  # the link's own silence report was not told already
            run_.warn(silence)
    run_.finish(last.t_s)
    return 0
