"""`padtune replay FILE`: run detection over a recording (or a raw capture) as if it were live.

With `--profile` the detection runs with other settings than the ones recorded, which shows what would
have happened: every touch found, the count per key and, when the recording has marks, the touches
that fall outside them (false touches). Output is `monitor`'s, lines or JSON Lines.

`--engine firmware` runs the detection through the compiled C firmware library (devices/firmware,
built with the system C compiler on first use) instead of the Python engine: the lines it prints are
the same, byte for byte, which is how a firmware engineer sees the board will detect as padtune does.
"""

from __future__ import annotations

import argparse
import time
from collections.abc import Iterator
from typing import Any

from processing.recording import read_recording
from processing.session import Session
from protocol.errors import UserError
from protocol.events import Event, FrameBlock
from tui.headless.output import make_output
from tui.headless.ports import (
    StopFlag,
    frame_rate,
    load_profile_arg,
    quiet_broken_pipe,
    seconds,
    speed_factor,
)
from tui.headless.runner import DetectionRun, warn_on_stderr
from tui.polarity_arg import add_polarity_arg

PACE_CHUNK_S = 0.05  # a paced replay hands frames over in slices of this much recorded time
ENGINES = ("python", "firmware")


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "replay", help="run detection over a recording or a raw capture",
        description="Feed a recording (padtune CSV) or a raw capture of protocol lines through detection "
        "and print what it finds, like 'monitor'. Use --profile to try other settings; with marks in the "
        "recording, touches outside them are counted as false touches.")
    p.add_argument("file", metavar="FILE", help="recording (CSV) or raw capture of protocol lines")
    p.add_argument("--profile", metavar="F", help="profile TOML with the detection settings to try")
    p.add_argument("--against", metavar="B",
                   help="a second profile: replay through both in one pass and show side by side what each "
                        "detects (touches per key, gained and lost, false touches, the first difference)")
    add_polarity_arg(p)
    p.add_argument("--speed", metavar="X", type=speed_factor, default=0.0,
                   help="replay speed: 1 = real time, 4 = four times faster, 0 = as fast as possible "
                        "(default)")
    p.add_argument("--json", action="store_true", help="write JSON Lines (the format of 'monitor --json')")
    p.add_argument("--engine", choices=ENGINES, default="python",
                   help="detect with padtune's Python engine (default) or the C firmware library "
                        "(devices/firmware, compiled with $CC or cc on first use); both print the same lines")
    p.add_argument("--every", metavar="S", type=seconds, help="a status every S seconds of recorded time")
    p.add_argument("--rate", metavar="HZ", type=frame_rate,
                   help="frame rate of a raw capture without an info line (default 100)")
    p.set_defaults(func=run)


def paced(events: list[Event], slice_s: float | None) -> Iterator[tuple[list[Event], float]]:
    """(events, recorded time) in stream order; FrameBlocks cut into `slice_s` slices if given."""
    for event in events:
        if isinstance(event, FrameBlock) and slice_s and len(event) > 1:
            t = event.t_s
            start = 0
            while start < len(event):
                stop = int(start + max(1, (t[start:] < t[start] + slice_s).sum()))
                board_time = None if event.board_time is None else event.board_time[start:stop]
                yield [FrameBlock(t[start:stop], event.seq[start:stop], event.readings[start:stop],
                                  event.first_index + start, board_time)], float(t[stop - 1])
                start = stop
        elif isinstance(event, FrameBlock):
            yield [event], float(event.t_s[-1]) if len(event) else 0.0
        else:
            yield [event], float(event.t_s)


def run(args: argparse.Namespace) -> int:
    return quiet_broken_pipe(lambda: _run(args))


def _run(args: argparse.Namespace) -> int:
    if args.against is not None:
        return _against(args)
    profile = load_profile_arg(args.profile)
    factory = _engine(args.engine)
    rec = read_recording(args.file, rate_hz=args.rate)
    session = Session(profile, polarity=args.polarity, engine_factory=factory)
    run_ = DetectionRun(session, make_output(args.json), origin_t_s=0.0, every_s=args.every, marks=rec.marks)
    if rec.truncated:
        run_.output.note(0.0, "the recording's last line was cut short (the writer was stopped mid-row)")
    wall0 = time.monotonic()
    first_t: float | None = None
    last_t = 0.0
    with StopFlag() as stop:
        # Slices keep a paced replay smooth and put each status at its recorded time.
        slice_s = PACE_CHUNK_S if args.speed > 0 else (args.every / 4 if args.every else None)
        for batch, t_s in paced(rec.events, slice_s):
            if stop.stopped:
                break
            if args.speed > 0:
                first_t = t_s if first_t is None else first_t
                delay = (t_s - first_t) / args.speed - (time.monotonic() - wall0)
                if delay > 0:
                    time.sleep(delay)
            last_t = max(last_t, t_s)
            run_.feed(batch, last_t)
    run_.finish(last_t)
    return 0


def _engine(engine: str) -> Any:
    """The engine factory for `--engine` (None: the Python engine)."""
    if engine != "firmware":
        return None
    from tui.firmware_engine import check_firmware, firmware_engine

    check_firmware()  # no compiler: one line and exit 2 before any output
    return firmware_engine


def _against(args: argparse.Namespace) -> int:
    """`--profile A --against B`: both in one pass, then the comparison (`tui.headless.against`)."""
    from tui.headless.against import AgainstRun, feed_all, write_human, write_json

    if args.profile is None:
        raise UserError("--against B compares with --profile A: give both profiles")
    if args.speed > 0 or args.every:
        raise UserError("--against compares a whole recording at once: leave out --speed and --every")
    profile_a, profile_b = load_profile_arg(args.profile), load_profile_arg(args.against)
    assert profile_a is not None and profile_b is not None
    factory = _engine(args.engine)
    rec = read_recording(args.file, rate_hz=args.rate)
    run_ = AgainstRun(profile_a, profile_b, rec.marks, polarity=args.polarity, engine_factory=factory)
    if rec.truncated:
        warn_on_stderr("the recording's last line was cut short (the writer was stopped mid-row)")
    with StopFlag() as stop:
        last_t = feed_all(run_, paced(rec.events, None), lambda: stop.stopped)
    write = write_json if args.json else write_human
    write(run_, args.profile, args.against, last_t)
    return 0
