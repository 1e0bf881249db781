"""The host's side of section 7's commands: send one line, await its answer, say how it went.

`CommandClient` is pure (no thread, no clock of its own, no I/O but the `send` callable it is given):
commands wait in a queue and go out one at a time; `feed(events)` takes the decoded events (the
link's reader thread hands `Answer`s over like any other event, so a UI timer or a CLI loop passes
them here) and `poll(now_s)` sends the next command and expires the one on the wire after
`timeout_s`. Each command ends in exactly one `Result`: applied (`ok`, with the `>val` replies
collected for `get`), refused (`>no`, its reason), or failed (no answer in time, a send that failed,
an answer that does not follow section 7); `Result.line` says it in one line.

An answer belongs to the command on the wire when it names it (`>ok get 3` for `get 3`, `>no set *:
...` for `set *`, `>no get: unknown command` for any `get`); anything else (a late answer to a command
that already timed out, a board's stray line) is counted in `strays` and never taken for another.
`run_commands` is the blocking loop for the command line (`padtune pull`, `push`).
"""

from __future__ import annotations

import time
from collections import deque
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field

from protocol.commands import CommandError, Reply, parse_command, parse_reply
from protocol.events import Answer, Event

DEFAULT_TIMEOUT_S = 1.0
MAX_QUEUED = 4096  # commands waiting; past this a submit is refused at once (a runaway caller)


@dataclass(slots=True)
class Result:
    """How one command ended. `status` is `applied`, `refused` or `failed`."""

    line: bytes  # the command as sent (with its LF)
    status: str
    reason: str = ""  # why it was refused or failed (one line)
    reply: Reply | None = None  # the final answer (`>ok` or `>no`) when there was one
    values: list[Reply] = field(default_factory=list)  # the `>val` replies before it (get)
    tag: object = None  # the caller's, given to `submit`

    @property
    def applied(self) -> bool:
        return self.status == "applied"

    @property
    def command(self) -> str:
        return self.line.decode("ascii", "replace").strip()

    def describe(self) -> str:
        """One line for a log or stderr."""
        if self.applied:
            return f"{self.command}: applied"
        what = "refused" if self.status == "refused" else "failed"
        return f"{self.command}: {what}: {self.reason}"


@dataclass(slots=True)
class _Pending:
    line: bytes
    tag: object
    subject: str
    word: str
    sent_at_s: float = 0.0
    values: list[Reply] = field(default_factory=list)


class CommandClient:
    """One command on the wire at a time; answers matched by what they name; a timeout each."""

    def __init__(self, send: Callable[[bytes], bool], timeout_s: float = DEFAULT_TIMEOUT_S) -> None:
        self.send = send
        self.timeout_s = timeout_s
        self.strays = 0  # answers that named no command on the wire (late ones, stray lines)
        self._queue: deque[_Pending] = deque()
        self._wire: _Pending | None = None

    @property
    def busy(self) -> bool:
        """Commands are queued or on the wire."""
        return self._wire is not None or bool(self._queue)

    @property
    def waiting(self) -> int:
        return len(self._queue) + (self._wire is not None)

    def submit(self, line: bytes, tag: object = None) -> Result | None:
        """Queue one command line (LF added if missing); a Result at once only when it cannot be queued."""
        if not line.endswith(b"\n"):
            line += b"\n"
        command = parse_command(line)
        if command is None:
            raise ValueError("an empty command")
        if len(self._queue) >= MAX_QUEUED:
            return Result(line, "failed", f"{MAX_QUEUED} commands already waiting", tag=tag)
        self._queue.append(_Pending(line, tag, command.subject, command.word))
        return None

    def cancel(self, reason: str) -> list[Result]:
        """Give up on every command (the board went away): each gets a `failed` result."""
        out = []
        if self._wire is not None:
            out.append(self._fail(self._wire, reason))
            self._wire = None
        while self._queue:
            out.append(self._fail(self._queue.popleft(), reason))
        return out

    def feed(self, events: Iterable[Event]) -> list[Result]:
        """Take the answers among `events` (others are ignored); the results they completed."""
        out: list[Result] = []
        for ev in events:
            if isinstance(ev, Answer):
                done = self._answer(ev)
                if done is not None:
                    out.append(done)
        return out

    def poll(self, now_s: float) -> list[Result]:
        """Expire the command on the wire after `timeout_s`; send the next. The results this ended."""
        out: list[Result] = []
        wire = self._wire
        if wire is not None and now_s - wire.sent_at_s >= self.timeout_s:
            self._wire = None
            out.append(self._fail(wire, f"no answer within {self.timeout_s:g} s"))
        while self._wire is None and self._queue:
            pending = self._queue.popleft()
            if self.send(pending.line) is False:
                out.append(self._fail(pending, "not sent: the board is not connected"))
                continue
            pending.sent_at_s = now_s
            self._wire = pending
        return out

    # -- answers ----------------------------------------------------------------------------------
    def _answer(self, ev: Answer) -> Result | None:
        wire = self._wire
        try:
            reply = parse_reply(ev.kind, ev.text)
        except CommandError as exc:
            if wire is None:
                self.strays += 1
                return None
            self._wire = None
            return self._fail(wire, f"unreadable answer ({exc}): >{ev.kind} {ev.text[:60]}")
        if wire is None:
            self.strays += 1
            return None
        if reply.kind == "val":
            if wire.word == "get":
                wire.values.append(reply)
            else:
                self.strays += 1
            return None
        if reply.subject not in (wire.subject, wire.word):
            self.strays += 1
            return None
        self._wire = None
        if reply.kind == "ok":
            return Result(wire.line, "applied", reply=reply, values=wire.values, tag=wire.tag)
        return Result(wire.line, "refused", reply.reason or "no reason given", reply=reply,
                      values=wire.values, tag=wire.tag)

    @staticmethod
    def _fail(pending: _Pending, reason: str) -> Result:
        return Result(pending.line, "failed", reason, values=pending.values, tag=pending.tag)


def run_commands(send: Callable[[bytes], bool], take_events: Callable[[], list[Event]],
                 lines: Sequence[bytes], timeout_s: float = DEFAULT_TIMEOUT_S,
                 clock: Callable[[], float] = time.monotonic, step_s: float = 0.01) -> list[Result]:
    """Send `lines` one after another and wait for each answer (or its timeout): the blocking loop for
    the command line, which has no UI thread to keep free. `take_events` returns what the link decoded
    since the last call (a front end's one drain, `tui.pipeline.Pipeline.step`); `send` writes a line
    (`Link.write`). Returns one Result per line, in order.
    """
    client = CommandClient(send, timeout_s)
    for line in lines:
        early = client.submit(line)
        if early is not None:
            raise RuntimeError(early.reason)
    results: list[Result] = []
    while True:
        results += client.poll(clock())
        if not client.busy:
            return results
        events = take_events()
        results += client.feed(events)
        if not events and client.busy:
            time.sleep(step_s)
