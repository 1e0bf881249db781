"""`padtune record PORT_OR_URL -o FILE`: write everything a board sends to a CSV recording.

The file format is `processing.recording` (README, "Recordings"). The link's events go through the
front ends' `tui.pipeline.Pipeline` to a writer thread (`tui.recorder`): rows reach the disk at least
every quarter second, so a crash or `kill -9` loses at most that and the file stays readable. On a terminal,
Enter writes a mark (with the typed text, if any) at that moment.
"""

from __future__ import annotations

import argparse
import queue
import sys
import threading
import time

from processing.recording import check_recording_target
from protocol.events import LinkFault
from tui.dash import HELP_NO_DASH, refuse_dash
from tui.headless.notices import NoticeGate
from tui.headless.output import make_console
from tui.headless.ports import StopFlag, add_port_args, open_link, seconds, stop_on_recording_error
from tui.headless.runner import link_fault_text, never_spoke
from tui.pipeline import Pipeline, Step

# Why `record -o -` is refused: a data logger's file is flushed every quarter second and synced at the end
# so a crash loses at most that; a pipe cannot be synced, and a reader that goes away would end the run.
DASH_WHY = "a recording is written to a file padtune flushes and syncs (a crash loses at most 0.25 s)"


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "record", help="record a board's frames to a CSV file",
        description="Record frames, info lines, board notes and link events to a CSV recording (commented "
        "metadata, a header, one row per frame). On a terminal, press Enter to mark a moment (type a note "
        "first to label it). Stops after --duration, on Ctrl-C or SIGTERM.")
    add_port_args(p)
    p.add_argument("-o", "--output", metavar="FILE", required=True,
                   help=f"the recording to write (CSV); a regular file only: {HELP_NO_DASH}")
    p.add_argument("--duration", metavar="S", type=seconds,
                   help="stop after S seconds (default: until stopped)")
    p.add_argument("--force", action="store_true", help="overwrite FILE if it already exists")
    p.set_defaults(func=run)


def _read_marks(lines: queue.Queue[str]) -> None:
    for line in sys.stdin:
        lines.put(line.strip())


def run(args: argparse.Namespace) -> int:
    refuse_dash("-o", args.output, DASH_WHY)
    check_recording_target(args.output, overwrite=args.force)  # before the port is opened
    clock = time.monotonic
    console = make_console(stderr=True)
    origin = clock()  # before the link starts, so its first events have t_s >= 0
    link = open_link(args.port, args.baud, clock)
    pipeline = Pipeline(link, None, clock=clock, source=args.port)  # no detection: frames go to the file
    try:
        recorder = pipeline.start_recording(args.output, origin_t_s=origin, overwrite=args.force)
    except BaseException:
        link.stop()
        raise
    marks: queue.Queue[str] = queue.Queue()
    interactive = sys.stdin.isatty() and console.is_terminal
    if interactive:
        threading.Thread(target=_read_marks, args=(marks,), daemon=True).start()
        console.print(f"recording to {args.output}; Enter marks a moment, Ctrl-C stops")

    gate = NoticeGate()

    def on_step(step: Step) -> None:
        stop_on_recording_error(step)
        now = step.t_s
        for ev in step.events:  # a silent or unreadable board: say so while recording, not only at the end
            told = link_fault_text(ev)
            if told is not None and isinstance(ev, LinkFault):
                for line in gate.add(told, now, kind=ev.kind.value):
                    console.print(f"padtune: {line}")
        for line in gate.due(now):
            console.print(f"padtune: {line}")
        while not marks.empty():
            text = marks.get_nowait()
            if pipeline.mark(now, "note", text=text) is not None:
                console.print(f"mark at {now - origin:.2f} s" + (f": {text}" if text else ""))

    until = None if args.duration is None else origin + args.duration
    with StopFlag() as stop:
        last = pipeline.run_to_end(until_s=until, stop=stop, on_step=on_step)
    for line in gate.flush():
        console.print(f"padtune: {line}")
    stats = link.stats
    silence = never_spoke(stats, args.port, last.t_s - origin)
    if silence is not None and not stats.extra.get("stalls"):  # not told already while recording
        console.print(f"padtune: {silence}")
    console.print(f"recorded {recorder.frames_written} frames in {last.t_s - origin:.1f} s "
                  f"({recorder.marks_written} marks) to {args.output}")
    return 0
