"""What the link tells the user about each opening of its port, decided from bytes, counts and time.

Pure (no I/O, no clock of its own): the link calls `opened()` whenever the port opens or reopens and
`feed()` after every read (empty reads too, so time alone can decide), and sends `?` or delivers the
faults it is given back. One `LinkWatch` lives as long as the link; per opening it decides:

- **ask**: no info line within `ASK_AFTER_S` (0.5 s) of opening: send `?` once. A board that was
  already running printed its info line before the port opened (POSIX opens flush the input), so it
  is asked again; a board that answers sends an info line without `proto`; silence is fine.
- **wrong baud**: most of the first `WINDOW_S` (2 s) of bytes are not text (`protocol.baudcheck`):
  `baud_suspect`, or, on a link with no baud rate (socket://, loop://), an `unreadable` fault that
  says what can be true there instead.
- **unreadable**: text arrives, but no frame in the first 2 s and at least `MIN_UNREAD_LINES` lines
  were not read as data: one `unreadable` fault that quotes the first such line
  (`Decoder.first_unreadable`) and names the forms padtune reads. A slow board still holding its
  first lines (plain forms are recognised over 8 lines) is not blamed: held lines are not unread.
  Lines that only ever overflow the line limit get their own advice (the line ends).
- **silence**: no bytes for `SILENT_AFTER_S` (2 s) since opening (the board never spoke) or since
  the last byte (it stalled): a `silent` fault, again each time the silence doubles (4, 8, 16 s...),
  so a dead board is reported a handful of times an hour, never once per read. `count` is the whole
  seconds of silence so far. Every silence counts once in `stalls`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from protocol.baudcheck import WINDOW_S, BaudCheck
from protocol.events import FaultKind, LinkFault, LinkStats
from protocol.rules import preview

ASK_AFTER_S = 0.5
SILENT_AFTER_S = 2.0
MIN_UNREAD_LINES = 3
SPEC = 'protocol/PROTOCOL.md, section "Plain forms"'
FORMS = ("bare number columns (1234 1250), name:value or name=value pairs (zone1:1234, zone2:1250), a "
         "name with a bracketed value (T0:[ 1234] T1:[ 1250]), each with an optional leading time column, "
         "and protocol v1 frames (@seq v0 v1 ...)")


def _unread(stats: LinkStats) -> int:
    return stats.garbled + stats.notes


@dataclass
class WatchStep:
    """What to do after one read: faults to deliver, and whether to send `?` now."""

    faults: list[LinkFault] = field(default_factory=list)
    ask: bool = False


class LinkWatch:
    """Decisions about the current opening; `stalls` counts silences over the link's whole life."""

    def __init__(self, port: str, baud: int, *, has_baud: bool = True, ask: bool = True) -> None:
        self.port = port
        self.baud = baud
        self.has_baud = has_baud
        self.ask_enabled = ask
        self.stalls = 0
        self.asked = 0  # `?` sent, over the link's whole life
        self.baud_suspect = False
        self._baud: BaudCheck | None = None
        self._opened_at_s = 0.0
        self._asked_now = False
        self._diagnosed = False
        self._bytes = 0
        self._last_byte_s: float | None = None
        self._silence_reported_s = 0.0  # the longest silence of the current gap already reported
        self._stats0 = LinkStats()

    @property
    def baud_checked(self) -> bool:
        """True once the wrong-baud check of the current opening has reached its verdict."""
        return self._baud is None

    def opened(self, now_s: float, stats: LinkStats) -> None:
        """The port has just (re)opened: every decision starts again."""
        self._opened_at_s = now_s
        self._baud = BaudCheck(now_s)
        self.baud_suspect = False
        self._asked_now = not self.ask_enabled
        self._diagnosed = False
        self._bytes = 0
        self._last_byte_s = None
        self._silence_reported_s = 0.0
        self._stats0 = stats.snapshot()

    def feed(self, data: bytes, now_s: float, stats: LinkStats,
             first_unreadable: bytes | None) -> WatchStep:
        """After a read of `data` (maybe empty) at `now_s`, with the decoder's counts after it."""
        step = WatchStep()
        if data:
            self._bytes += len(data)
            self._last_byte_s = now_s
            self._silence_reported_s = 0.0
        since_open = now_s - self._opened_at_s
        if not self._asked_now and since_open >= ASK_AFTER_S:
            self._asked_now = True
            if stats.infos == self._stats0.infos:
                step.ask = True
                self.asked += 1
        if self._baud is not None:
            verdict = self._baud.feed(data, now_s)
            if verdict is not None:
                self._baud_verdict(verdict, now_s, step)
        if not self._diagnosed and self._baud is None and since_open >= WINDOW_S:
            self._unreadable(now_s, stats, first_unreadable, step)
        self._silence(now_s, step)
        return step

    # -- decisions ---------------------------------------------------------------------------------
    def _baud_verdict(self, suspect: bool, now_s: float, step: WatchStep) -> None:
        check, self._baud = self._baud, None
        if not suspect or check is None:
            return
        self._diagnosed = True  # the lines are unreadable because the bytes are: one message
        if self.has_baud:
            self.baud_suspect = True
            step.faults.append(LinkFault(now_s, FaultKind.BAUD_SUSPECT, 1, check.describe(self.baud)))
        else:
            step.faults.append(LinkFault(now_s, FaultKind.UNREADABLE, 1, check.describe_network(self.port)))

    def _unreadable(self, now_s: float, stats: LinkStats, first: bytes | None, step: WatchStep) -> None:
        s0 = self._stats0
        if stats.frames > s0.frames:
            self._diagnosed = True  # the board is read: nothing to say
            return
        if first is not None and _unread(stats) - _unread(s0) >= MIN_UNREAD_LINES:
            detail = (f"no frames from {self.port} in {now_s - self._opened_at_s:.0f} s: lines like "
                      f"{preview(first, 60)} are in no form padtune reads; it reads {FORMS}; see {SPEC}")
        elif stats.overlong - s0.overlong >= 1 and first is None:
            detail = (f"no frames from {self.port}: its lines are longer than the limit and were dropped; "
                      "does the board end its lines (LF, CR LF or CR)? see protocol/PROTOCOL.md")
        else:
            return
        self._diagnosed = True
        step.faults.append(LinkFault(now_s, FaultKind.UNREADABLE, 1, detail))

    def _silence(self, now_s: float, step: WatchStep) -> None:
        since = self._opened_at_s if self._last_byte_s is None else self._last_byte_s
        gap_s = now_s - since
        due = SILENT_AFTER_S if self._silence_reported_s == 0.0 else self._silence_reported_s * 2
        if gap_s < due:
            return
        if self._silence_reported_s == 0.0:
            self.stalls += 1
        self._silence_reported_s = due
        seconds = int(gap_s)
        if self._last_byte_s is None:
            detail = (f"{self.port} has sent nothing in the {seconds} s since it opened (never spoke): is "
                      "the board powered and running, is this its port, and does it print unasked?")
        else:
            detail = (f"{self.port} stalled: nothing for {seconds} s after {self._bytes} bytes; the board "
                      "may have hung, reset or stopped printing")
        step.faults.append(LinkFault(now_s, FaultKind.SILENT, seconds, detail))
