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
from collections.abc import Iterable, Iterator
from typing import Any

import numpy as np

from processing.recording_read import RecordingStream, open_recording
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
MAX_WAIT_S = 5.0  # a paced replay waits at most this long for the next slice (a leap in time is skipped)
ENGINES = ("python", "firmware")
TRUNCATED = "the recording's last line was cut short (the writer was stopped mid-row)"


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


def paced(events: Iterable[Event], slice_s: float | None) -> Iterator[tuple[list[Event], float]]:
    """(events, recorded time) in stream order; FrameBlocks cut into `slice_s` slices if given.

    A slice still open at the end of a block carries on into the next block when that one continues it
    (a recording is read in chunks: where a chunk ends says nothing about the slices)."""
    held: FrameBlock | None = None  # the open slice's frames at the end of the last block
    for event in events:
        if isinstance(event, FrameBlock) and slice_s:
            if held is not None and _continues(held, event):
                event = _joined(held, event)
            elif held is not None:
                yield [held], float(held.t_s[-1])
            held = None
            for piece, closed in _slices(event, slice_s):
                if closed:
                    yield [piece], float(piece.t_s[-1])
                else:
                    held = piece
            continue
        if held is not None:
            yield [held], float(held.t_s[-1])
            held = None
        if isinstance(event, FrameBlock):
            yield [event], float(event.t_s[-1]) if len(event) else 0.0
        else:
            yield [event], float(event.t_s)
    if held is not None:
        yield [held], float(held.t_s[-1])


def _slices(block: FrameBlock, slice_s: float) -> Iterator[tuple[FrameBlock, bool]]:
    """(slice, closed): each slice from its first frame to the frames less than `slice_s` later; the
    last is not closed when every frame after its first is inside its span (more may follow)."""
    t = block.t_s
    ordered = len(t) < 2 or bool(np.all(t[1:] >= t[:-1]))
    start = 0
    while start < len(block):
        if ordered:  # the same count as below, in log time
            stop = max(start + 1, int(np.searchsorted(t, t[start] + slice_s, "left")))
        else:
            stop = int(start + max(1, (t[start:] < t[start] + slice_s).sum()))
        board_time = None if block.board_time is None else block.board_time[start:stop]
        piece = FrameBlock(t[start:stop], block.seq[start:stop], block.readings[start:stop],
                           block.first_index + start, board_time)
        yield piece, stop < len(block)
        start = stop


def _continues(a: FrameBlock, b: FrameBlock) -> bool:
    return (b.first_index == a.first_index + len(a) and a.channels == b.channels
            and a.board_time is None and b.board_time is None
            and a.board_states is None and b.board_states is None)


def _joined(a: FrameBlock, b: FrameBlock) -> FrameBlock:
    return FrameBlock(np.concatenate([a.t_s, b.t_s]), np.concatenate([a.seq, b.seq]),
                      np.concatenate([a.readings, b.readings]), a.first_index)


def _flat(chunks: Iterable[list[Event]]) -> Iterator[Event]:
    for chunk in chunks:
        yield from chunk


def _told(stream: RecordingStream) -> Iterator[Event]:
    """The stream's events; a cut last line is told on stderr once the first chunk proved readable."""
    for i, chunk in enumerate(stream.chunks()):
        if i == 0 and stream.truncated:
            warn_on_stderr(TRUNCATED)
        yield from chunk


def run(args: argparse.Namespace) -> int:
    return quiet_broken_pipe(lambda: _run(args))


def _run(args: argparse.Namespace) -> int:
    if args.against is not None:
        return _against(args)
    profile = load_profile_arg(args.profile)
    factory = _engine(args.engine)
    with open_recording(args.file, rate_hz=args.rate) as stream:
        return _replay(args, stream, Session(profile, polarity=args.polarity, engine_factory=factory))


def _replay(args: argparse.Namespace, stream: RecordingStream, session: Session) -> int:
    """Feed the recording chunk by chunk as it is read (bounded memory whatever its size)."""
    run_ = DetectionRun(session, make_output(args.json), origin_t_s=0.0, every_s=args.every,
                        marks=stream.marks)
    wall0 = time.monotonic()
    first_t: float | None = None
    last_t = 0.0
    told = False
    with StopFlag() as stop:
        # Slices keep a paced replay smooth and put each status at its recorded time.
        slice_s = PACE_CHUNK_S if args.speed > 0 else (args.every / 4 if args.every else None)
        for batch, t_s in paced(_flat(stream.chunks()), slice_s):
            if stop.stopped:
                break
            if stream.truncated and not told:  # told once the file proved readable, before any event
                run_.output.note(0.0, TRUNCATED)
                told = True
            if args.speed > 0:
                first_t = t_s if first_t is None else first_t
                delay = (t_s - first_t) / args.speed - (time.monotonic() - wall0)
                if delay > MAX_WAIT_S:  # a leap in recorded time is not waited out
                    wall0 -= delay - MAX_WAIT_S
                    delay = MAX_WAIT_S
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
    with open_recording(args.file, rate_hz=args.rate) as stream:
        run_ = AgainstRun(profile_a, profile_b, stream.marks, polarity=args.polarity, engine_factory=factory)
        with StopFlag() as stop:
            last_t = feed_all(run_, paced(_told(stream), None), lambda: stop.stopped)
    write = write_json if args.json else write_human
    write(run_, args.profile, args.against, last_t)
    return 0
