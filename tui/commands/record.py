"""`padtune record PORT_OR_URL -o FILE`: write everything a board sends to a CSV recording.

The file format is `processing.recording` (README, "Recordings"). Rows reach the disk at least every
quarter second, so a crash or `kill -9` loses at most that and the file stays readable. On a terminal,
Enter writes a mark (with the typed text, if any) at that moment.
"""

from __future__ import annotations

import argparse
import queue
import sys
import threading
import time

from processing.recording import RecordingWriter
from tui.headless.notices import NoticeGate
from tui.headless.output import make_console
from tui.headless.ports import StopFlag, add_port_args, open_link, pump, seconds
from tui.headless.runner import link_fault_text


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser(
        "record", help="record a board's frames to a CSV file",
        description="Record frames, info lines, board notes and link events to a CSV recording (commented "
        "metadata, a header, one row per frame). On a terminal, press Enter to mark a moment (type a note "
        "first to label it). Stops after --duration, on Ctrl-C or SIGTERM.")
    add_port_args(p)
    p.add_argument("-o", "--output", metavar="FILE", required=True, help="the recording to write (CSV)")
    p.add_argument("--duration", metavar="S", type=seconds,
                   help="stop after S seconds (default: until stopped)")
    p.add_argument("--force", action="store_true", help="overwrite FILE if it already exists")
    p.set_defaults(func=run)


def _read_marks(lines: queue.Queue[str]) -> None:
    for line in sys.stdin:
        lines.put(line.strip())


def run(args: argparse.Namespace) -> int:
    clock = time.monotonic
    console = make_console(stderr=True)
    origin = clock()  # before the link starts, so its first events have t_s >= 0
    link = open_link(args.port, args.baud, clock)
    try:
        writer = RecordingWriter(args.output, source=args.port, clock=clock, origin_t_s=origin,
                                 overwrite=args.force)
    except BaseException:
        link.stop()
        raise
    marks: queue.Queue[str] = queue.Queue()
    interactive = sys.stdin.isatty() and console.is_terminal
    if interactive:
        threading.Thread(target=_read_marks, args=(marks,), daemon=True).start()
        console.print(f"recording to {args.output}; Enter marks a moment, Ctrl-C stops")

    gate = NoticeGate()

    def consume(events: list, now: float) -> None:
        writer.write_events(events)
        for ev in events:  # a silent or unreadable board: say so while recording, not only at the end
            told = link_fault_text(ev)
            for line in gate.add(told, now, kind=ev.kind.value) if told else ():
                console.print(f"padtune: {line}")
        for line in gate.due(now):
            console.print(f"padtune: {line}")
        while not marks.empty():
            text = marks.get_nowait()
            writer.mark(now, "note", text=text)
            console.print(f"mark at {now - writer.origin_t_s:.2f} s" + (f": {text}" if text else ""))

    try:
        with StopFlag() as stop:
            end = pump(link, consume, duration_s=args.duration, clock=clock, stop=stop,
                       start_t_s=writer.origin_t_s)
    finally:
        writer.close()
    for line in gate.flush():
        console.print(f"padtune: {line}")
    console.print(f"recorded {writer.frames_written} frames in {end - writer.origin_t_s:.1f} s "
                  f"({writer.marks_written} marks) to {args.output}")
    return 0
