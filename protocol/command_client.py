"""The host's side of section 7's commands: send one line, await its answer, say how it went.

`CommandClient` is pure (no thread, no clock of its own, no I/O but the `send` callable it is given):
commands wait in a queue and go out one at a time; `feed(events)` takes the decoded events (the
link's reader thread hands `Answer`s over like any other event, so a UI timer or a CLI loop passes
them here) and `poll(now_s)` sends the next command and expires the one on the wire after
`timeout_s` of silence: the timeout counts from the send, and again from each `>val` line of its
answer (a board still answering a `get *` of many channels at a slow baud is not silent), within an
overall `limit_s` per command (the caller's bound, scaled to the answer's size and the link's rate).
Each command ends in exactly one `Result`: applied (`ok`, with the `>val` replies collected for
`get`), refused (`>no`, its reason), or failed (no answer in time, a send that failed, an answer that
does not follow section 7, a `>ok set` that echoes other values than were sent); `Result.line` says
it in one line.

An answer belongs to the command on the wire when it names it (`>ok get 3` for `get 3`, `>no set *:
...` for `set *`, `>no get: unknown command` for any `get`); anything else (a board's stray line) is
counted in `strays` and never taken for another. A board answers in order, so a command that timed
out still owes its answer: the next final answer naming it is that late one, dropped (with the
`>val` lines before it), never taken for a later command with the same name. An answer to a later
command proves the board moved past the owed ones, which are then forgotten. (Section 7 has no
command numbers: a board that never answers a command at all makes the next one with the same
name look late once, and that one fails too.)
`run_commands` is the blocking loop for the command line (`padtune pull`, `push`).
"""

from __future__ import annotations

import time
from collections import deque
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field

from protocol.commands import CommandError, Reply, format_pairs, parse_command, parse_pairs, parse_reply
from protocol.events import Answer, Event

DEFAULT_TIMEOUT_S = 1.0
DEFAULT_LIMIT_S = 30.0  # a whole answer's bound when the caller gives none (a board that never ends)
MAX_OWED = 64  # late answers remembered; past this the oldest is forgotten
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
    sent: dict[str, int] | None  # the pairs of a `set`, to compare with what `>ok set` echoes
    limit_s: float | None = None
    sent_at_s: float = 0.0
    quiet_from_s: float = 0.0  # when the board last said something of this answer (or the send)
    heard: bool = False  # a `>val` line came since the last poll
    values: list[Reply] = field(default_factory=list)


class CommandClient:
    """One command on the wire at a time; answers matched by what they name; a timeout each."""

    def __init__(self, send: Callable[[bytes], bool], timeout_s: float = DEFAULT_TIMEOUT_S,
                 limit_s: float = DEFAULT_LIMIT_S) -> None:
        self.send = send
        self.timeout_s = timeout_s
        self.limit_s = max(limit_s, timeout_s)
        self.strays = 0  # answers that named no command on the wire (late ones, stray lines)
        self.late = 0  # of those, answers owed to commands that had timed out
        self._queue: deque[_Pending] = deque()
        self._wire: _Pending | None = None
        self._owed: deque[tuple[str, str]] = deque(maxlen=MAX_OWED)  # (subject, word) of timed-out ones

    @property
    def busy(self) -> bool:
        """Commands are queued or on the wire."""
        return self._wire is not None or bool(self._queue)

    @property
    def waiting(self) -> int:
        return len(self._queue) + (self._wire is not None)

    def submit(self, line: bytes, tag: object = None, limit_s: float | None = None) -> Result | None:
        """Queue one command line (LF added if missing); a Result at once only when it cannot be queued.

        `limit_s` bounds the whole answer (default the client's); silence ends it after `timeout_s`."""
        if not line.endswith(b"\n"):
            line += b"\n"
        command = parse_command(line)
        if command is None:
            raise ValueError("an empty command")
        if len(self._queue) >= MAX_QUEUED:
            return Result(line, "failed", f"{MAX_QUEUED} commands already waiting", tag=tag)
        sent = None
        if command.word == "set":
            try:
                sent = parse_pairs(command.args[1:])
            except CommandError:
                sent = None  # a line the caller wrote by hand: the board will say what is wrong
        limit = self.limit_s if limit_s is None else max(limit_s, self.timeout_s)
        self._queue.append(_Pending(line, tag, command.subject, command.word, sent, limit))
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
        """Expire the command on the wire after `timeout_s` of silence or its `limit_s` in all; send
        the next. The results this ended."""
        out: list[Result] = []
        wire = self._wire
        if wire is not None:
            if wire.heard:
                wire.quiet_from_s, wire.heard = now_s, False
            expired = self._expired(wire, now_s)
            if expired:
                self._wire = None
                self._owed.append((wire.subject, wire.word))  # its answer may still come: not ours
                out.append(self._fail(wire, expired))
        while self._wire is None and self._queue:
            pending = self._queue.popleft()
            if self.send(pending.line) is False:
                out.append(self._fail(pending, "not sent: the board is not connected"))
                continue
            pending.sent_at_s = pending.quiet_from_s = now_s
            self._wire = pending
        return out

    def _expired(self, wire: _Pending, now_s: float) -> str:
        """Why the command on the wire has waited long enough ("" when it has not)."""
        got = len(wire.values)
        if wire.limit_s is not None and now_s - wire.sent_at_s >= wire.limit_s:
            return f"the answer did not end within {wire.limit_s:g} s ({got} value lines so far)"
        if now_s - wire.quiet_from_s < self.timeout_s:
            return ""
        if got:
            return f"the answer stopped after {got} value lines (nothing more for {self.timeout_s:g} s)"
        return f"no answer within {self.timeout_s:g} s"

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
                wire.heard = True
            else:
                self.strays += 1
            return None
        if self._late(reply):
            self.strays += 1
            self.late += 1
            self.strays += len(wire.values)  # the values before it were the late answer's too
            wire.values.clear()
            return None
        if reply.subject not in (wire.subject, wire.word):
            self.strays += 1 + len(wire.values)  # the values before it were that answer's, not ours
            wire.values.clear()
            return None
        self._wire = None
        self._owed.clear()  # the board answered a later command: it owes nothing before it
        if reply.kind == "ok":
            mismatch = _echo_mismatch(wire.sent, reply.values)
            if mismatch:
                return Result(wire.line, "failed", mismatch, reply=reply, values=wire.values, tag=wire.tag)
            return Result(wire.line, "applied", reply=reply, values=wire.values, tag=wire.tag)
        return Result(wire.line, "refused", reply.reason or "no reason given", reply=reply,
                      values=wire.values, tag=wire.tag)

    def _late(self, reply: Reply) -> bool:
        """`reply` is the answer owed to a command that timed out (the oldest it can be): drop it."""
        for i, (subject, word) in enumerate(self._owed):
            if reply.subject in (subject, word):
                del self._owed[i]
                return True
        return False

    @staticmethod
    def _fail(pending: _Pending, reason: str) -> Result:
        return Result(pending.line, "failed", reason, values=pending.values, tag=pending.tag)


def _echo_mismatch(sent: dict[str, int] | None, echoed: dict[str, int] | None) -> str:
    """How a `>ok set` answer's pairs differ from what was sent ("" when they are the same pairs)."""
    if sent is None or echoed is None:
        return ""
    for key, value in sent.items():
        if key not in echoed:
            return f"{key}: the board's answer leaves it out (sent {_shown(key, value)})"
        if echoed[key] != value:
            return (f"{key}: the board says it now holds {_shown(key, echoed[key])}, "
                    f"not {_shown(key, value)} as sent")
    extra = [k for k in echoed if k not in sent]
    if extra:
        return f"{extra[0]}: the board's answer names it, but it was not sent"
    return ""


def _shown(key: str, value: int) -> str:
    return format_pairs({key: value}, [key])


def run_commands(send: Callable[[bytes], bool], take_events: Callable[[], list[Event]],
                 lines: Sequence[bytes], timeout_s: float = DEFAULT_TIMEOUT_S,
                 clock: Callable[[], float] = time.monotonic, step_s: float = 0.01,
                 limit_s: float = DEFAULT_LIMIT_S) -> list[Result]:
    """Send `lines` one after another and wait for each answer (or its timeout): the blocking loop for
    the command line, which has no UI thread to keep free. `take_events` returns what the link decoded
    since the last call (a front end's one drain, `tui.pipeline.Pipeline.step`); `send` writes a line
    (`Link.write`). Returns one Result per line, in order.
    """
    client = CommandClient(send, timeout_s, limit_s)
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
