"""Settings that travel: the live session's edits sent to a board that takes them, and its answers.

A board whose info line says `settings=1` (PROTOCOL.md section 7) gets every edit the session makes
(`settings_changed`, `polarity_changed`: the `LiveSource` calls them from `apply`/`set_polarity`, so
steps, typed values, undo and redo, copies to all or to a group and the guided capture's batch all
travel) as `set` lines through a `protocol.command_client.CommandClient`, whose lines go out through
the link's writer thread (`Link.post`), never on the UI thread. `step()` runs in the source's poll on
the UI thread: it takes the answers the link's reader thread queued like any event, expires commands
that got no answer, and says what happened: per channel and setting `applied`, `refused` (with the
board's reason) or `no answer`, and log lines. On connect (and after a reconnect) it reads the board
(`get *`); `step()` then returns the board's values once, for the screen to compare with the profile.
Boards without `settings=1` are never sent anything.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field

from processing.board_settings import BoardValues, board_values, settings_pairs
from processing.settings import SETTING_KEYS, ChannelSettings
from protocol.command_client import CommandClient, Result
from protocol.commands import ALL, POLARITY_KEY, get_line, set_line
from protocol.events import BoardChanged, BoardInfo, Event, FaultKind, LinkFault, LinkState, LinkStatus

COMMAND_SET = "1"
TIMEOUT_S = 1.0
APPLIED, REFUSED, SENDING, NO_ANSWER, DIFFERS = "applied", "refused", "sending", "no answer", "differs"


@dataclass
class SyncStep:
    """What one poll brought: lines for the log, refusals to notify, and the board's values once read."""

    lines: list[str] = field(default_factory=list)
    refusals: list[str] = field(default_factory=list)
    board: BoardValues | None = None


@dataclass(frozen=True, slots=True)
class _Sent:
    what: str  # "read", "set"
    channels: tuple[int, ...] = ()
    keys: tuple[str, ...] = ()


class BoardSync:
    """The session's side of the settings commands for one link."""

    def __init__(self, send: Callable[[bytes], bool], names: Callable[[], Sequence[str]],
                 timeout_s: float = TIMEOUT_S) -> None:
        self.client = CommandClient(send, timeout_s)
        self._names = names
        self.active = False  # the board said settings=1
        self.status: dict[tuple[int, str], str] = {}
        self.reasons: dict[tuple[int, str], str] = {}
        self.read_count = 0  # `get *` answered
        self._quiet = 0  # nested `quietly()` calls: changes the board already holds are not sent

    # -- what the screen reads --------------------------------------------------------------------
    def channel_status(self, channel: int) -> tuple[tuple[str, str], ...]:
        """(key, status) of one channel's settings the board was sent, in the edit bar's key order."""
        if not self.active:
            return ()
        return tuple((k, self.status[(channel, k)]) for k in (*SETTING_KEYS, POLARITY_KEY)
                     if (channel, k) in self.status)

    # -- edits out --------------------------------------------------------------------------------
    def settings_changed(self, channel: int, old: ChannelSettings, new: ChannelSettings) -> None:
        keys = [k for k in SETTING_KEYS if getattr(old, k) != getattr(new, k)]
        if keys and self.active and not self._quiet:
            self._set(channel, settings_pairs(new, keys=keys))

    def polarity_changed(self, channel: int, sign: int | None) -> None:
        """A stated polarity travels; `learn it again` (None) stays on the host."""
        if sign is not None and self.active and not self._quiet:
            self._set(channel, {POLARITY_KEY: sign})

    def send_all(self, settings: Sequence[ChannelSettings], polarity: Sequence[int | None]) -> None:
        """Every setting of every channel (the profile's, when the user chose to send it)."""
        for c, s in enumerate(settings):
            sign = polarity[c] if c < len(polarity) else None
            self._set(c, settings_pairs(s, sign))

    def mark_board_values(self, values: BoardValues, unknown: Iterable[tuple[int, str]] = ()) -> None:
        """The board holds these values and the session has them too: applied. `unknown`: (channel, key)
        where the two differ and nobody chose yet (`differs`, until the user takes one side)."""
        for c in values:
            for k in (*SETTING_KEYS, POLARITY_KEY):
                self.status[(c, k)] = APPLIED
                self.reasons.pop((c, k), None)
        for where in unknown:
            self.status[where] = DIFFERS

    def quietly(self) -> _Quiet:
        """`with sync.quietly():` changes made inside are not sent (the board holds them already)."""
        return _Quiet(self)

    def read(self) -> None:
        self.client.submit(get_line(None), _Sent("read"))

    def _set(self, channel: int, pairs: dict[str, int]) -> None:
        keys = tuple(pairs)
        for k in keys:
            self.status[(channel, k)] = SENDING
        self.client.submit(set_line(channel, pairs), _Sent("set", (channel,), keys))

    # -- answers in -------------------------------------------------------------------------------
    def step(self, events: Iterable[Event], now_s: float) -> SyncStep:
        out = SyncStep()
        results: list[Result] = []
        for ev in events:
            if isinstance(ev, BoardInfo):
                self._info(ev, out)
            elif isinstance(ev, LinkStatus) and ev.state is LinkState.RECONNECTED and self.active:
                self.read()  # the board may have restarted while away: read it again
            elif isinstance(ev, LinkFault) and ev.kind is FaultKind.RESET and self.active:
                # A restart without a new info line: its RAM settings are gone (the kept or factory
                # ones again), so what the edit bar says the board holds may no longer be so.
                for where in self.status:
                    self.status[where] = SENDING
                out.lines.append("⇄ the board restarted: reading its settings again")
                self.read()
            elif isinstance(ev, LinkStatus) and ev.state in (LinkState.DISCONNECTED, LinkState.CLOSED):
                results += self.client.cancel(f"the board went away ({ev.state.value})")
            elif isinstance(ev, BoardChanged):
                self.status.clear()
                self.reasons.clear()
        results += self.client.feed(events)
        results += self.client.poll(now_s)
        for result in results:
            self._result(result, out)
        return out

    def _info(self, info: BoardInfo, out: SyncStep) -> None:
        said = info.fields.get("settings")
        if said is None and not info.new_session:
            return  # an answer to `?` that leaves the key out changes nothing
        takes = said == COMMAND_SET
        if takes and (info.new_session or not self.active):
            self.active = True
            self.status.clear()
            self.reasons.clear()
            out.lines.append("⇄ the board takes settings: edits are sent to it; reading its settings")
            self.read()
        elif not takes and self.active:
            self.active = False
            out.lines.append("ⓘ the board no longer takes settings commands: edits stay on this computer")
        elif said is not None and not takes and info.new_session:  # once a session, not per `?`
            out.lines.append(f"ⓘ the board speaks settings command set {said}; this padtune speaks "
                             f"{COMMAND_SET}: edits stay on this computer")

    def _result(self, result: Result, out: SyncStep) -> None:
        sent = result.tag
        if not isinstance(sent, _Sent):
            return
        if sent.what == "read":
            if not result.applied:
                out.lines.append(f"✗ reading the board's settings: {result.reason}")
                return
            try:
                out.board = board_values(result.values)
            except ValueError as exc:
                out.lines.append(f"✗ the board's settings: {exc}")
                return
            self.read_count += 1
            return
        status = APPLIED if result.applied else REFUSED if result.status == "refused" else NO_ANSWER
        names = self._names()
        for c in sent.channels:
            for k in sent.keys:
                self.status[(c, k)] = status
                if result.applied:
                    self.reasons.pop((c, k), None)
                else:
                    self.reasons[(c, k)] = result.reason
        if not result.applied:
            which = ", ".join(names[c] if c < len(names) else f"ch{c}" for c in sent.channels) or ALL
            verb = "refused" if status == REFUSED else "did not answer"
            named = any(result.reason.startswith(f"{k}:") for k in sent.keys)  # the board named the key
            line = f"✗ board {verb} {which}: {'' if named else ' '.join(sent.keys) + ': '}{result.reason}"
            out.lines.append(line)
            out.refusals.append(line)


class _Quiet:
    def __init__(self, sync: BoardSync) -> None:
        self.sync = sync

    def __enter__(self) -> None:
        self.sync._quiet += 1

    def __exit__(self, *exc: object) -> None:
        self.sync._quiet -= 1
