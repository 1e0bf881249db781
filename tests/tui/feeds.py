"""Test feeds for the live screen: they stand where `protocol.link.Link` stands (drain, write, stats, state).

`SyntheticFeed` makes frames directly (a flat baseline, seeded noise, touches added on request), so a
test controls every count. `SimFeed` runs a seeded simulated board through the real decoder with a
clock the test moves, for screens that should look like the demo.
"""

from __future__ import annotations

import numpy as np

from protocol.events import BoardInfo, Event, FrameBlock, LinkState, LinkStats, LinkStatus


class SyntheticFeed:
    def __init__(self, names: tuple[str, ...] = ("zone1", "zone2", "zone3", "zone4", "stop"),
                 rate_hz: float = 100.0, base_counts: int = 1000, noise_counts: int = 2,
                 seed: int = 3, polarity: tuple[int, ...] = (1,)) -> None:
        self.names, self.rate_hz, self.base, self.noise = names, rate_hz, base_counts, noise_counts
        self.rng = np.random.default_rng(seed)
        self.t_s = 0.0
        self.index = 0
        self.queue: list[Event] = []
        self.touch = np.zeros(len(names), np.int64)
        self.written: list[bytes] = []
        self._stats = LinkStats()
        self._state = LinkState.CONNECTED
        # The board states its polarity (touches raise its counts) unless `polarity=()`: then the
        # session learns it from each key's first touch.
        self.queue.append(BoardInfo(0.0, {"board": "synthetic"}, proto=1, board="synthetic",
                                    channels=len(names), rate_hz=rate_hz, names=names, polarity=polarity,
                                    new_session=True))

    def advance(self, seconds: float) -> None:
        n = max(1, round(seconds * self.rate_hz))
        t = self.t_s + np.arange(1, n + 1) / self.rate_hz
        noise = self.rng.integers(-self.noise, self.noise + 1, size=(n, len(self.names)))
        readings = self.base + noise + self.touch
        self.queue.append(FrameBlock(t, np.arange(self.index, self.index + n) % 65536, readings, self.index))
        self.t_s, self.index = float(t[-1]), self.index + n
        self._stats.frames += n

    def set_touch(self, channel: int, counts: int) -> None:
        self.touch[channel] = counts

    def disconnect(self) -> None:
        self._state = LinkState.RECONNECTING
        self.queue.append(LinkStatus(self.t_s, LinkState.DISCONNECTED, "test://feed", "device went away"))
        self.queue.append(LinkStatus(self.t_s, LinkState.RECONNECTING, "test://feed", "waiting for it"))

    def reconnect(self) -> None:
        self._state = LinkState.CONNECTED
        self.queue.append(LinkStatus(self.t_s, LinkState.RECONNECTED, "test://feed"))

    # -- the Producer interface ---------------------------------------------------------------------
    def drain(self, max_events: int | None = None) -> list[Event]:
        out, self.queue = self.queue, []
        return out

    def write(self, data: bytes) -> bool:
        self.written.append(data)
        return True

    @property
    def stats(self) -> LinkStats:
        return self._stats.snapshot()

    @property
    def state(self) -> LinkState:
        return self._state


def screen_text(app: object) -> str:
    """The screen as plain text lines (what a user reads), for asserting on what is shown."""
    strips = app.screen._compositor.render_strips()  # type: ignore[attr-defined]
    return "\n".join(strip.text.rstrip() for strip in strips)


class SimFeed:
    """A seeded simulated board decoded by the real decoder; `advance()` moves its clock forward.

    Frames are fed in steps of one screen frame (1/20 s by default) so arrival times look like a link's.
    By default the board does not take settings commands (no settings=1: the screens of the tests
    written before settings travelled); `settings=True` makes one that does (PROTOCOL.md section 7).
    """

    def __init__(self, board: str = "greenhouse", seed: int = 7, step_s: float = 0.05, script: bool = False,
                 settings: bool = False, **sim_args: object) -> None:
        from devices.simulator import SimBoard
        from protocol.decoder import Decoder

        self.t_s = 0.0
        self.step_s = step_s
        self.board = SimBoard(board, seed=seed, clock=lambda: self.t_s, script=script, settings=settings,
                              **sim_args)
        self.decoder = Decoder()
        self.queue: list[Event] = []
        self._state = LinkState.CONNECTED

    def advance(self, seconds: float) -> None:
        steps = max(1, round(seconds / self.step_s))
        for _ in range(steps):
            self.t_s += self.step_s
            self.queue.extend(self.decoder.feed(self.board.read_due(), self.t_s))

    def drain(self, max_events: int | None = None) -> list[Event]:
        out, self.queue = self.queue, []
        return out

    def write(self, data: bytes) -> bool:
        self.board.write(data)
        return True

    @property
    def stats(self) -> LinkStats:
        return self.decoder.stats.snapshot()

    @property
    def state(self) -> LinkState:
        return self._state


def log_text(app: object) -> str:
    """Everything in the event log, oldest first (the screen shows only its last lines)."""
    from tui.widgets.event_log import EventLog

    log = app.query_one(EventLog)  # type: ignore[attr-defined]
    width = log.scrollable_content_region.width
    lines: list[str] = []
    full = False
    for strip in log.lines:  # a long line goes on below, indented past the time: join it back
        text = strip.text.rstrip()
        if lines and text.startswith(" " * 9) and text.strip():
            # a line cut inside a word (folded) filled the width; one broken at a space did not
            lines[-1] += ("" if full else " ") + text.strip()
        else:
            lines.append(text)
        full = len(text) >= width
    return "\n".join(lines)
