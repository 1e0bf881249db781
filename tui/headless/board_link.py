"""A link to a board that takes settings commands (PROTOCOL.md section 7), for `padtune pull` and `push`.

`connect()` opens the port and waits for the board's info line: a board whose info line says
`settings=1` is ready; one without it (asked once more with `?`, in case the first line was a stale
one) or one that never sends an info line is a `UserError` (one line, exit 2). `read_board()` asks
`get *` and returns the settings the board holds: its answer may take a while on a board of many
channels at a slow baud, so the wait counts from its last line (`ANSWER_TIMEOUT_S` of silence ends
it) within a bound scaled to its size at the link's byte rate (`answer_limit_s`).
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass

from processing.board_settings import BoardValues, board_values
from protocol.command_client import Result, run_commands
from protocol.commands import get_line
from protocol.errors import UserError
from protocol.events import BoardInfo, LinkState, LinkStatus
from protocol.link import Link
from tui.headless.ports import open_link
from tui.pipeline import Pipeline

COMMAND_SET = "1"
INFO_WAIT_S = 3.0
ANSWER_TIMEOUT_S = 2.0
VAL_LINE_BYTES = 240  # a `>val` line at its longest (every value at its widest, a checksum), LF
BITS_PER_BYTE = 10  # 8N1: start, 8 data, stop
ANSWER_SHARE = 3.0  # the answer shares the link with the board's frames: allow it a third of the rate


def answer_limit_s(channels: int, baud: int) -> float:
    """How long a `get *` answer of `channels` value lines may take in all at `baud`: its bytes at a
    third of the link's byte rate (the board's frames share the link), plus the silent timeout. 512
    channels at 115200 Bd: 123 KB of answer, 10.7 s at full rate, a 34 s bound."""
    byte_rate = max(baud, 1) / BITS_PER_BYTE
    return ANSWER_TIMEOUT_S + (channels + 1) * VAL_LINE_BYTES / byte_rate * ANSWER_SHARE


@dataclass
class BoardLink:
    link: Link
    pipeline: Pipeline  # the one place a front end drains the link (nothing detected here)
    info: BoardInfo
    port: str

    @property
    def name(self) -> str:
        return self.info.board or self.port

    def run(self, lines: list[bytes]) -> list[Result]:
        """Each line and its answer in turn; a `get *` may take as long as its size needs."""
        limit_s = answer_limit_s(max(self.info.channels, 1), self.link.baud)
        return run_commands(self.link.write, lambda: self.pipeline.step().events, lines, ANSWER_TIMEOUT_S,
                            limit_s=limit_s)


def connect(port: str, baud: int | None, wait_s: float = INFO_WAIT_S,
            clock: Callable[[], float] = time.monotonic) -> BoardLink:
    """Open `port` and wait (at most `wait_s`) for an info line that says `settings=1`."""
    link = open_link(port, baud, clock)
    pipeline = Pipeline(link, clock=clock, source=port)
    try:
        return BoardLink(link, pipeline, _wait_for_settings(link, pipeline, port, wait_s, clock), port)
    except BaseException:
        link.stop()
        raise


def _wait_for_settings(link: Link, pipeline: Pipeline, port: str, wait_s: float,
                       clock: Callable[[], float]) -> BoardInfo:
    deadline = clock() + wait_s
    asked = False
    infos_seen = 0
    while clock() < deadline:
        for ev in pipeline.step().events:
            if isinstance(ev, BoardInfo):
                infos_seen += 1
            elif isinstance(ev, LinkStatus) and ev.state is LinkState.DISCONNECTED:
                raise UserError(f"{port}: the board went away ({ev.detail or 'disconnected'})")
        info = link.info
        if info is not None and info.channels:
            said = info.fields.get("settings")
            if said == COMMAND_SET:
                return info
            if said is not None:
                raise UserError(f"{port}: the board speaks settings command set {said!r}; this padtune "
                                f"speaks set {COMMAND_SET} (PROTOCOL.md section 7)")
            if not asked:  # the line we saw may be older than the firmware now running: ask once
                link.request_info()
                asked, infos_seen = True, 0
            elif infos_seen:
                break
        time.sleep(0.02)
    info = link.info
    if info is None:
        raise UserError(f"{port}: no info line from the board in {wait_s:g} s; settings travel needs a "
                        "board that speaks protocol v1 and says settings=1 (PROTOCOL.md section 7)")
    board = info.board or "the board"
    raise UserError(f"{port}: {board} does not take settings commands (its info line has no settings=1); "
                    "tune it live and put the profile in its firmware with `padtune export --c-header`")


def read_board(board: BoardLink) -> tuple[BoardValues, Result]:
    """`get *`: the settings the board holds per channel (empty with a failed or refused result)."""
    result = board.run([get_line(None)])[0]
    if not result.applied:
        return {}, result
    try:
        return board_values(result.values), result
    except ValueError as exc:
        result.status, result.reason = "failed", str(exc)
        return {}, result
