"""Opening a port or URL for a headless command, option checking, and a clean way to stop.

Everything a user can get wrong (a missing port, a busy one, a bad number) becomes a `UserError` or an
argparse error with one clear line; a headless run stops cleanly on Ctrl-C, SIGTERM or a closed pipe.
The run itself is the front ends' shared loop, `tui.pipeline.Pipeline`.
"""

from __future__ import annotations

import argparse
import contextlib
import math
import signal
import sys
import time
from collections.abc import Callable
from pathlib import Path
from types import FrameType
from typing import TYPE_CHECKING

from protocol.errors import UserError

if TYPE_CHECKING:
    from processing.profile import Profile
    from protocol.link import Link
    from tui.pipeline import Step

DEFAULT_BAUD = 115200


def _number(text: str, not_a_number: str, in_range: Callable[[float], bool], out_of_range: str) -> float:
    """Parse an argparse float; the messages say what was expected (NaN and infinities are refused)."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} {not_a_number}") from None
    if not math.isfinite(value) or not in_range(value):
        raise argparse.ArgumentTypeError(f"{text!r} {out_of_range}")
    return value


def seconds(text: str) -> float:
    """argparse type: a positive, finite number of seconds."""
    return _number(text, "is not a number of seconds", lambda v: v > 0,
                   "must be a positive number of seconds")


def speed_factor(text: str) -> float:
    """argparse type: 0 (as fast as possible) or a positive speed factor."""
    return _number(text, "is not a speed factor (1 = real time, 0 = flat out)", lambda v: v >= 0,
                   "must be 0 (as fast as possible) or a positive factor")


def frame_rate(text: str) -> float:
    """argparse type: a frame rate in Hz (positive, finite, at most 1 MHz)."""
    return _number(text, "is not a frame rate in Hz (such as 100)", lambda v: 0 < v <= 1e6,
                   "must be a frame rate above 0 and at most 1e6 Hz")


def percentage(text: str) -> float:
    """argparse type: a percentage from 0 up to (not including) 100."""
    return _number(text, "is not a percentage (such as 20)", lambda v: 0 <= v < 100,
                   "must be a percentage from 0 to 99")


def baud_rate(text: str) -> int:
    if not text.isdigit() or int(text) <= 0:
        raise argparse.ArgumentTypeError(f"{text!r} is not a baud rate (a whole number such as 115200)")
    return int(text)


def add_port_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("port", metavar="PORT_OR_URL",
                   help="serial device (/dev/ttyACM0, COM3) or pyserial URL (sim://greenhouse?speed=4, "
                        "socket://host:port)")
    p.add_argument("--baud", type=baud_rate, default=None,
                   help=f"baud rate (default {DEFAULT_BAUD}; no effect on socket:// URLs)")


def load_profile_arg(text: str | None) -> Profile | None:
    """The profile named on the command line, or None (ProfileError/UserError say what is wrong)."""
    if text is None:
        return None
    from processing.profile import load_profile

    # load_profile says what is wrong with the path itself: missing, a folder, a FIFO, a device, too large.
    return load_profile(Path(text).expanduser())


def baud_note(port: str, baud: int | None) -> str | None:
    """What to tell a user who gave `--baud` where it means nothing (a TCP link has no baud rate)."""
    from protocol.opening import scheme_of

    if baud is None or scheme_of(port) != "socket":
        return None
    return (f"--baud {baud} has no effect on {port}: a TCP link has no baud rate; set the rate on the "
            "bridge's serial side (an rfc2217:// URL sets it from here)")


def open_link(target: str, baud: int | None, clock: Callable[[], float] = time.monotonic) -> Link:
    """Start a `protocol.link.Link` on `target` (a missing, busy or forbidden port is a UserError).

    `baud` None means the option was not given (DEFAULT_BAUD is used); given with a socket:// URL, one
    stderr line says it has no effect there.
    """
    from protocol.link import Link

    link = Link(target, DEFAULT_BAUD if baud is None else baud, clock=clock)
    link.start()
    note = baud_note(target, baud)
    if note:
        sys.stderr.write(f"padtune: {note}\n")
        sys.stderr.flush()
    return link


class StopFlag:
    """Set by SIGTERM (and SIGINT) so loops finish their summary instead of dying mid-line."""

    def __init__(self) -> None:
        self.stopped = False
        self._old: dict[int, Callable[[int, FrameType | None], object] | int | None] = {}

    def __enter__(self) -> StopFlag:
        for sig in (signal.SIGINT, signal.SIGTERM):
            # Outside the main thread (tests) signals cannot be caught: Ctrl-C then raises as usual.
            with contextlib.suppress(ValueError):
                self._old[sig] = signal.signal(sig, self._handle)
        return self

    def _handle(self, signum: int, frame: FrameType | None) -> None:
        self.stopped = True

    def __exit__(self, *exc: object) -> None:
        for sig, old in self._old.items():
            signal.signal(sig, old)


def quiet_broken_pipe(func: Callable[[], int], code_on_pipe: int = 0) -> int:
    """Run `func` (which flushes what it writes); a reader that went away (`| head`) ends the command
    quietly with `code_on_pipe`."""
    try:
        code = func()
        sys.stdout.flush()  # inside the guard: a failed flush at exit would print a traceback
        return code
    except BrokenPipeError:
        import os

        # Point stdout at /dev/null so the interpreter's final flush does not complain again.
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return code_on_pipe


def stop_on_recording_error(step: Step) -> None:
    """A headless run's recording that stopped by itself (a full disk) ends the command: UserError, one
    line, exit 2 (the rows written before are kept)."""
    if step.recording_errors:
        raise UserError(step.recording_errors[0])
