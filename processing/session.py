"""The glue every front end uses: protocol events in, detection events and measures out.

`Session.handle(events)` feeds FrameBlocks to the engine, takes names, polarity and frame rate from
BoardInfo (names also from a plain form's StreamForm), re-baselines on a new session (an info line
carrying `proto`) or a board reset, rebuilds for a new width on BoardChanged, runs groups and sliders,
and keeps the measures. Live edits go through `set_channel_settings` and `set_polarity`; `profile`
always reflects them, ready to save. Frames that carry the board's own key states are compared with the
engine's (`processing.twin`): its reports (`TwinMismatch`) come out of `handle` among the detections, in
frame order, so every front end gets them through its pipeline; `twin` has the running count.

Before a channel detects it may have to go through its first contact (`processing.startup`): without
a profile its threshold and hysteresis are provisional, from its noise over its first quiet second;
without a stated direction (info line, profile, `--polarity`) it learns it from its first touch. Until
then it reports no touch. ALGORITHM.md, "Provisional settings" and "Polarity learned from the first
touch".
"""

from __future__ import annotations

from collections import deque
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from processing.boardtime import BoardClock
from processing.contact import EDITED, FirstContact
from processing.detections import DetectionEvent, KeyState, Rebaselined, StuckRelease
from processing.engine import Engine
from processing.fixed import to_counts
from processing.groups import ExclusiveGroup
from processing.measure import SETTLE_S, ChannelQuality, Measures, VerdictBounds
from processing.names import NameProblem, channel_names
from processing.profile import Profile, default_names, profile_for
from processing.provisional import QUIET_MIN_FRAMES, QUIET_S
from processing.reference import PlainEngine
from processing.settings import ChannelSettings
from processing.slider import Slider
from processing.startup import (
    READY,
    Measured,
    Startup,
    Transition,
    settings_for_engine,
)
from processing.twin import TwinCheck, TwinMismatch
from protocol.events import (
    BoardChanged,
    BoardInfo,
    Event,
    FaultKind,
    FrameBlock,
    LinkFault,
    StreamForm,
)

DEFAULT_RATE_HZ = 100.0  # assumed until the board states its rate or enough frames have arrived to tell



@dataclass(frozen=True, slots=True)
class ChannelRow:
    """One channel as a front end shows it: latest values, settings and quality, and its first contact:
    `polarity` (+1, -1, None while unknown), `provisional` (settings from its noise, not tuned) and
    `phase` ("measuring" its quiet second, "learning" its direction, or "ready")."""

    channel: int
    name: str
    reading: int
    baseline_counts: int
    delta_counts: int
    state: KeyState
    settings: ChannelSettings
    quality: ChannelQuality
    polarity: int | None = 1
    provisional: bool = False
    phase: str = READY


_INFO_KEYS = ("proto", "board", "channels", "rate_hz", "names", "method", "polarity", "fw")


def _merged_info(session: BoardInfo | None, line: BoardInfo) -> BoardInfo:
    """The session's info after `line`: a new session replaces it, any other line updates the keys it has."""
    if session is None or line.new_session:
        return line
    given = {k: getattr(line, k) for k in _INFO_KEYS if getattr(line, k) not in (None, ())}
    return replace(session, t_s=line.t_s, fields={**session.fields, **line.fields}, **given)


def _slice(block: FrameBlock, a: int, b: int) -> FrameBlock:
    if a == 0 and b == len(block):
        return block
    bt = block.board_time[a:b] if block.board_time is not None else None
    bs = block.board_states[a:b] if block.board_states is not None else None
    return FrameBlock(block.t_s[a:b], block.seq[a:b], block.readings[a:b], block.first_index + a, bt, bs)


def _joined(events: Iterable[Event]) -> Iterator[Event]:
    """The events in order, each run of frame blocks that continue one another as one block.

    A link hands over a block per read (a few each screen frame, one per frame from a slow board);
    the detector's results do not depend on the cuts, but each block costs its own pass through the
    engine and measures: one pass per run is several times cheaper.
    """
    run: list[FrameBlock] = []
    for ev in events:
        if isinstance(ev, FrameBlock) and (not run or _continues(run[-1], ev)):
            run.append(ev)
            continue
        if run:
            yield _concat(run)
            run = []
        if isinstance(ev, FrameBlock):
            run.append(ev)
        else:
            yield ev
    if run:
        yield _concat(run)


def _continues(a: FrameBlock, b: FrameBlock) -> bool:
    return b.first_index == a.first_index + len(a) and b.channels == a.channels and \
        (a.board_time is None) == (b.board_time is None) and \
        (a.board_states is None) == (b.board_states is None)


def _concat(run: list[FrameBlock]) -> FrameBlock:
    if len(run) == 1:
        return run[0]
    bt = None if run[0].board_time is None else np.concatenate([b.board_time for b in run])
    bs = None if run[0].board_states is None else np.concatenate([b.board_states for b in run])
    return FrameBlock(np.concatenate([b.t_s for b in run]), np.concatenate([b.seq for b in run]),
                      np.concatenate([b.readings for b in run]), run[0].first_index, bt, bs)

# Builds the engine for (channels, settings, polarity, profile) in place of the Python one: an object with
# Engine's API. One whose `runs_groups` is true also runs the profile's groups and sliders, returning their
# events after each frame's channel events (the C library through tui/firmware_engine.py does).
EngineFactory = Callable[[int, list[ChannelSettings], list[int], Profile], Any]


class Session(FirstContact):
    """Owns one board's engine, measures, groups and sliders. Not thread-safe: call from one thread.

    `polarity` is the command line's `--polarity` (one sign for all channels or one per channel)."""

    def __init__(self, profile: Profile | None = None, *, window_s: float = 2.0, history_frames: int = 8192,
                 bounds: VerdictBounds | None = None, plain: bool = False,
                 settle_s: float = SETTLE_S, polarity: Sequence[int] = (),
                 engine_factory: EngineFactory | None = None) -> None:
        self.requested_profile = profile
        self.window_s, self.history_frames, self.bounds, self.plain = window_s, history_frames, bounds, plain
        self.settle_s = settle_s  # the noise window's guard around touch activity (processing.measure)
        self.forced_polarity = tuple(int(p) for p in polarity)
        self.engine_factory = engine_factory
        self.info: BoardInfo | None = None
        self.form: StreamForm | None = None
        self.engine: Engine | PlainEngine | None = None
        self.measures: Measures | None = None
        self.startup: Startup | None = None
        self.groups: list[ExclusiveGroup] = []
        self.sliders: list[Slider] = []
        self.notices: deque[str] = deque(maxlen=200)  # things the user should know (mismatched profile, ...)
        self.polarity: list[int | None] = []  # per channel; None while it is being learned
        self.polarity_source: list[str | None] = []
        self._profile: Profile | None = profile
        self._edited: dict[int, Profile] = {}  # by width: the profile with live edits, kept across rebuilds
        self._provisional: dict[int, dict[int, ChannelSettings]] = {}  # by width: measured provisional ones
        self._user_set: dict[int, set[int]] = {}  # by width: channels whose settings the user chose
        self._known_polarity: dict[int, dict[int, tuple[int, str]]] = {}  # by width: edited or learned
        self._rate_declared = False
        self._rate_from_info = False
        self._clock = BoardClock()
        self._said: set[object] = set()  # notices given once per session
        self._measured: list[Measured] = []  # provisional settings taken in this handle() call
        self.twin = TwinCheck()  # the board's own states against the engine's (frames with a state field)
        self._twin_width = 0

    # ------------------------------------------------------------ state for front ends
    @property
    def channels(self) -> int:
        return self.engine.channels if self.engine else 0

    @property
    def profile(self) -> Profile | None:
        """The profile in use, with every live edit applied (None before the board's width is known)."""
        return self._profile

    @property
    def names(self) -> tuple[str, ...]:
        return self._profile.names if self._profile and self.engine else ()

    @property
    def rate_hz(self) -> float:
        return self.measures.rate_hz if self.measures else DEFAULT_RATE_HZ

    def settings(self, channel: int) -> ChannelSettings:
        if self._profile is None:
            raise IndexError("no board yet")
        return self._profile.settings_for(channel)

    def provisional(self, channel: int) -> bool:
        """True while the channel's settings come (or will come) from its noise, not from a person."""
        return self.requested_profile is None and channel not in self._user_set.get(self.channels, set())

    def phase(self, channel: int) -> str:
        return self.startup.phase[channel] if self.startup is not None else READY

    def rows(self) -> list[ChannelRow]:
        if self.engine is None or self.measures is None or self._profile is None:
            return []
        e, m, p = self.engine, self.measures, self._profile
        readings, baselines, deltas, states = e.readings, e.baselines_fp, e.deltas, e.states
        quality = m.qualities()
        return [ChannelRow(c, p.names[c], readings[c], to_counts(baselines[c]), deltas[c], states[c],
                           p.settings_for(c), quality[c], self.polarity[c], self.provisional(c),
                           self.phase(c)) for c in range(e.channels)]

    # ------------------------------------------------------------ commands
    def set_channel_settings(self, channel: int, settings: ChannelSettings) -> None:
        """Apply new settings to one channel now (ValueError names the problem; nothing changes then).

        The channel stops being provisional, unless these are exactly its measured provisional
        settings again (an undo back to them)."""
        self._check_channel(channel)
        assert self.engine is not None and self._profile is not None
        settings.check()
        width = self.engine.channels
        chosen = self._user_set.setdefault(width, set())
        if self._provisional.get(width, {}).get(channel) == settings and self.requested_profile is None:
            chosen.discard(channel)
        else:
            chosen.add(channel)
        if self.startup is not None and self.startup.settings_given(channel):
            self.engine.rebaseline(channel)
        self.engine.set_settings(channel, settings_for_engine(settings, self.phase(channel) == READY))
        self.twin.rearm()  # padtune's settings changed under the board: a disagreement is news again
        self._profile = self._profile.with_settings(channel, settings)
        self._edited[width] = self._profile

    def set_polarity(self, channel: int, sign: int | None) -> None:
        """Set a channel's direction now (+1 counts rise on touch, -1 fall; None: learn it again from
        the next touch). It re-baselines. ValueError names the problem."""
        self._check_channel(channel)
        assert self.engine is not None
        if sign is None:
            self._forget_polarity(channel)
            return
        if sign not in (1, -1):
            raise ValueError(f"polarity must be + or -, not {sign!r}")
        self._apply_polarity(channel, sign, EDITED)
        self.twin.rearm()
        assert self._profile is not None
        self._edited[self.engine.channels] = self._profile

    def measured(self, channel: int) -> bool:
        """False when the profile marks the channel's settings as not measured (`measured = false`)."""
        return self._profile is None or channel not in self._profile.unmeasured_channels

    def set_measured(self, channel: int, measured: bool) -> None:
        """Mark (or clear the mark on) a channel's settings as not measured: the guided capture's keys
        without a suggestion keep their settings and are saved `measured = false`."""
        self._check_channel(channel)
        assert self.engine is not None and self._profile is not None
        self._profile = self._profile.with_measured(channel, measured)
        self._edited[self.engine.channels] = self._profile

    def apply_profile(self, profile: Profile) -> None:
        """Use a (newly loaded) profile: rebuilds now when the width is known, else on the first frames."""
        self.requested_profile = self._profile = profile
        self._edited.clear()
        self._provisional.clear()
        self._user_set.clear()
        for known in self._known_polarity.values():  # a profile's polarity beats this session's edits
            for c in [c for c, (_, source) in known.items() if source == EDITED]:
                del known[c]
        if self.engine is not None:
            self._build(self.engine.channels)

    def rebaseline(self, channel: int | None = None) -> None:
        if self.engine is not None:
            self.engine.rebaseline(channel)
            self.twin.rearm()

    def automatic(self, saved: Profile) -> Profile:
        """`saved` with what this session did by itself applied: the board's names, rate and polarity,
        learned polarities and the provisional settings of channels still provisional. Front ends
        compare the current profile with this to tell the user's unsaved edits from the automatic."""
        p = self._profile
        if p is None or saved.channels != p.channels:
            return saved
        out = replace(saved, names=p.names, board=p.board, rate_hz=p.rate_hz)
        if EDITED not in self.polarity_source:
            out = replace(out, polarity=p.polarity)
        # As `out = out.with_settings(c, s)` for each provisional channel, with one copy of the overrides:
        # front ends ask every screen frame, and a copy per channel was 64 copies of 64 entries.
        overrides: dict[int, ChannelSettings] | None = None
        for c, s in self._provisional.get(p.channels, {}).items():
            if self.provisional(c):
                if overrides is None:
                    overrides = dict(out.overrides)
                if s == out.defaults:
                    overrides.pop(c, None)
                else:
                    overrides[c] = s
        return out if overrides is None else replace(out, overrides=overrides)

    def _check_channel(self, channel: int) -> None:
        if self.engine is None or self._profile is None:
            raise ValueError("no board yet: settings can be changed once frames arrive")
        if not 0 <= channel < self.engine.channels:
            raise ValueError(f"no channel {channel}: the board has {self.engine.channels}")

    # ------------------------------------------------------------ events
    def handle(self, events: Iterable[Event]) -> list[DetectionEvent | TwinMismatch]:
        out: list[DetectionEvent | TwinMismatch] = []
        for ev in _joined(events):
            if isinstance(ev, FrameBlock):
                out.extend(self._frames(ev))
            elif isinstance(ev, BoardInfo):
                self._info(ev)
            elif isinstance(ev, StreamForm):
                self._form(ev)
            elif isinstance(ev, LinkFault) and ev.kind == FaultKind.RESET:
                self.notices.append("board reset: baselines taken again")
                self.rebaseline()
            elif isinstance(ev, BoardChanged):
                self.notices.append(f"board now has {_channels(ev.channels)} (was {ev.old_channels})")
                self._build(ev.channels)
        self._tell_provisional()
        return out

    def _frames(self, block: FrameBlock) -> list[DetectionEvent | TwinMismatch]:
        if len(block) == 0:
            return []
        if self.engine is None or self.engine.channels != block.channels:
            if self.engine is not None:
                was = self.engine.channels
                self.notices.append(f"frames now have {_channels(block.channels)} (was {was})")
            self._build(block.channels)
        assert self.engine is not None and self.measures is not None
        if block.board_time is not None:
            self._board_time(block)
        steps: list[Transition] = []
        if self.startup is not None and self.startup.busy:
            steps = self.startup.advance(block.readings, block.t_s)
        found: list[DetectionEvent | TwinMismatch] = []
        parts: list[tuple[np.ndarray, np.ndarray]] = []
        start = i = 0
        while i < len(steps):  # run the engine up to each transition's frame, apply it, go on
            # A transition found on frames of an earlier block (a quiet stretch chosen after the give-up
            # time, say) has a negative row: it takes effect before this block's first frame.
            stop = max(start, steps[i].row + 1)
            if stop > start:
                found.extend(self._run(_slice(block, start, stop)))
                parts.append((self.engine.last_deltas, self.engine.last_states))
            while i < len(steps) and max(start, steps[i].row + 1) == stop:
                self._transition(steps[i])
                i += 1
            start = stop
        if start < len(block):
            found.extend(self._run(_slice(block, start, len(block))))
            parts.append((self.engine.last_deltas, self.engine.last_states))
        if len(parts) > 1:  # the engine's last_* cover the whole block, as when it ran it in one go
            self.engine.last_deltas = np.concatenate([d for d, _ in parts])
            self.engine.last_states = np.concatenate([st for _, st in parts])
        self._estimate_rate()
        return found

    def _run(self, block: FrameBlock) -> list[DetectionEvent | TwinMismatch]:
        assert self.engine is not None and self.measures is not None
        found: list[DetectionEvent | TwinMismatch] = list(self.engine.process(block))
        deltas, states = self.engine.last_deltas, self.engine.last_states
        self.measures.ingest(block.t_s, block.readings, deltas, states,
                             restart=self._new_zeros(block.first_index, found))
        for tracker in (*self.groups, *self.sliders):
            found.extend(tracker.update(block.first_index, block.t_s, deltas, states))
        twin = self._twin(block, states) if block.board_states is not None else []
        found.extend(twin)
        if len(self.groups) + len(self.sliders) or twin:
            found.sort(key=lambda e: e.index)
        return found

    def _twin(self, block: FrameBlock, states: np.ndarray) -> list[TwinMismatch]:
        """Compare the board's states with the engine's after each frame, on the keys whose settings a
        person gave (a profile or an edit) and that detect: provisional settings are padtune's own guess,
        not the board's, and a key in its first contact reports nothing yet; comparing those would only
        be noise."""
        assert block.board_states is not None
        compared = [self.phase(c) == READY and not self.provisional(c) for c in range(block.channels)]
        if not any(compared):
            if "twin" not in self._said:
                self._said.add("twin")
                self.notices.append("the board sends its own key states: padtune compares them with its "
                                    "own on keys whose settings come from a profile or an edit, none so far; "
                                    "load the profile the firmware was built with")
            return []
        mask = None if all(compared) else np.array(compared)
        return self.twin.compare(block.board_states, states, block.first_index, block.t_s, self.rate_hz, mask,
                                 block.seq)

    @staticmethod
    def _new_zeros(first_index: int, found: list[DetectionEvent | TwinMismatch]) -> dict[int, int]:
        """Per channel, the first row of the block measured against a new baseline: older deltas are not its
        noise. A re-baselined frame has delta 0 already; a stuck release's frame still the old delta."""
        rows: dict[int, int] = {}
        for ev in found:
            if isinstance(ev, Rebaselined):
                rows[ev.channel] = ev.index - first_index
            elif isinstance(ev, StuckRelease):
                rows[ev.channel] = ev.index - first_index + 1
        return rows

    # ------------------------------------------------------------ board info, names, rate
    def _info(self, line: BoardInfo) -> None:
        """A line with `proto` starts a new session; one without updates the session's info key by key."""
        old = self.info
        self.info = info = _merged_info(old, line)
        width = info.channels or (len(info.names) or None)
        if width and (self.engine is None or self.engine.channels != width):
            self._build(width)
            return
        self._rename()
        if info.rate_hz and self.measures is not None:
            self.measures.rate_hz, self._rate_declared, self._rate_from_info = float(info.rate_hz), True, True
            if self.startup is not None:
                self.startup.rate_hz = float(info.rate_hz)
        if info.polarity and self.engine is not None and (old is None or old.polarity != info.polarity):
            self._board_polarity(info)
        if line.new_session and self.engine is not None:
            self.notices.append("new session: baselines taken again")
            self.engine.rebaseline()
            self.twin.rearm()

    def _form(self, form: StreamForm) -> None:
        """A plain form's names become channel names (an info line's win)."""
        self.form = form
        if self.engine is not None and len(form.names) == self.engine.channels:
            self._rename()

    def _board_names(self, channels: int) -> tuple[str, ...]:
        """The names the board gives for `channels` channels: its info line's, else its plain form's."""
        if self.info is not None and len(self.info.names) == channels:
            return tuple(self.info.names)
        if self.form is not None and len(self.form.names) == channels:
            return tuple(self.form.names)
        return ()

    def _names(self, channels: int, fallback: Sequence[str]) -> tuple[str, ...]:
        """Names per channel: the board's where valid and unique, else `fallback` (or chN); each problem
        is told once."""
        given = self._board_names(channels)
        if not given:
            return tuple(fallback) if len(fallback) == channels else default_names(channels)
        names, problems = channel_names(given, channels, fallback)
        self._tell_names(problems)
        return names

    def _tell_names(self, problems: list[NameProblem]) -> None:
        for problem in problems:
            key = ("name", problem.channel, problem.given, problem.reason)
            if key not in self._said:
                self._said.add(key)
                self.notices.append(problem.describe())

    def _rename(self) -> None:
        """Take the board's channel names, each where usable (display only: groups keep indices)."""
        p = self._profile
        if p is None or self.engine is None or not self._board_names(p.channels):
            return
        names = self._names(p.channels, p.names)
        if names != p.names:
            self._profile = replace(p, names=names)

    def _board_time(self, block: FrameBlock) -> None:
        """The frame rate from the board's own time column, unless its info line states one."""
        assert block.board_time is not None and self.measures is not None
        if self._rate_from_info or not self._clock.observe(block.board_time, block.t_s):
            return
        if self._clock.rate_hz is not None:
            self.measures.rate_hz, self._rate_declared = self._clock.rate_hz, True
            if self.startup is not None:
                self.startup.rate_hz = self._clock.rate_hz
            self.notices.append(f"frame rate {self._clock.rate_hz:.4g} Hz, from the board's time column "
                                f"(ticks of 1 {self._clock.unit})")
        else:
            self.notices.append(f"the board's time column does not give the frame rate "
                                f"({self._clock.refused}): measuring it from arrival times")

    @property
    def known_rate_hz(self) -> float | None:
        """The frame rate the board stated or its frames showed; None while only assumed (times in ms
        are converted at it, so not at a guess)."""
        return self._declared_rate()

    def _declared_rate(self) -> float | None:
        return self.measures.rate_hz if self.measures is not None and self._rate_declared else None

    def _estimate_rate(self) -> None:
        """Without a declared rate, measure it from host times once a few seconds of frames are in."""
        if self._rate_declared or self.measures is None:
            return
        h = self.measures.history
        if len(h) >= 256:
            t_s = h.last(len(h))[0]
            span = float(t_s[-1] - t_s[0])
            if span >= 2.0:
                self.measures.rate_hz, self._rate_declared = (len(t_s) - 1) / span, True

    # ------------------------------------------------------------ building
    def _build(self, channels: int) -> None:
        """A fresh engine (baselines from the next frame) and measures for `channels` channels."""
        info, wanted = self.info, self._edited.get(channels, self.requested_profile)
        fallback = wanted.names if wanted is not None and wanted.channels == channels else \
            self._profile.names if self._profile is not None and self._profile.channels == channels else ()
        names = self._names(channels, fallback)
        board = (info.board if info else None) or (wanted.board if wanted else "")
        rate = (info.rate_hz if info else None) or (wanted.rate_hz if wanted else None)
        if wanted is not None and wanted.board and info is not None and info.board \
                and info.board != wanted.board:
            self.notices.append(f"profile is for board '{wanted.board}', this board says '{info.board}'")
        if wanted is not None and wanted.channels == channels:
            profile = replace(wanted, names=names)
        else:
            profile = profile_for(channels, names, board)
            if wanted is None and self._profile is None:
                # Untuned defaults rarely fit a real overlay (a key that never reaches the default
                # threshold looks like a dead board): each channel's own noise sets provisional ones.
                self.notices.append(
                    "no profile given: each channel's threshold and hysteresis are provisional, set "
                    f"from its own noise over its first {QUIET_S:g} s of quiet frames (at least "
                    f"{QUIET_MIN_FRAMES}); keep hands off the keys until then, no touch is reported before. "
                    "Tune them and save a profile")
            if wanted is not None:
                self.notices.append(f"profile is for {wanted.channels} channels, the board has {channels}: "
                                    "using the profile's defaults for every channel")
                profile = replace(profile, defaults=wanted.defaults, limits=wanted.limits)
        profile = replace(profile, rate_hz=rate, board=board or profile.board)
        self.polarity, self.polarity_source = self._resolve_polarity(channels, info, profile)
        self._profile = profile
        self._sync_polarity()
        profile = self._profile
        measured = self._provisional.get(channels, {})
        need_noise = [self.provisional(c) and c not in measured for c in range(channels)]
        need_polarity = [p is None for p in self.polarity]
        self.startup = Startup(channels, need_noise, need_polarity, rate) \
            if any(need_noise) or any(need_polarity) else None
        self._tell_learning(profile.names)
        ready = [self.startup is None or self.startup.phase[c] == READY for c in range(channels)]
        settings = [settings_for_engine(profile.settings_for(c), ready[c]) for c in range(channels)]
        signs = [p or 1 for p in self.polarity]
        if self.engine_factory is not None:
            self.engine = self.engine_factory(channels, settings, signs, profile)
        else:
            self.engine = (PlainEngine if self.plain else Engine)(channels, settings, signs)
        self.measures = Measures(channels, rate or DEFAULT_RATE_HZ, self.window_s, self.history_frames,
                                 bounds=self.bounds, settle_s=self.settle_s)
        self._rate_declared = self._rate_from_info = rate is not None
        if self.startup is not None and not self._rate_declared and self._clock.rate_hz is not None:
            self.measures.rate_hz, self._rate_declared = self._clock.rate_hz, True
            self.startup.rate_hz = self._clock.rate_hz
        inside = getattr(self.engine, "runs_groups", False)  # the engine reports them itself
        self.groups = [] if inside else [ExclusiveGroup(g) for g in profile.groups]
        self.sliders = [] if inside else [Slider(s) for s in profile.sliders]
        if channels != self._twin_width:  # another board (or the same one with another channel count)
            self.twin.reset()
            self._twin_width = channels
        self.twin.rearm()


def _channels(count: int) -> str:
    return f"{count} channel{'' if count == 1 else 's'}"
