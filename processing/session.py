"""The glue every front end uses: protocol events in, detection events and measures out.

`Session.handle(events)` feeds FrameBlocks to the engine, takes names, polarity and frame rate from
BoardInfo (names also from a plain form's StreamForm), re-baselines on a new session (an info line
carrying `proto`) or a board reset, rebuilds for a new width on BoardChanged, runs groups and sliders,
and keeps the measures. Live edits go through `set_channel_settings` and `set_polarity`; `profile`
always reflects them, ready to save.

Before a channel detects it may have to go through its first contact (`processing.startup`): without
a profile its threshold and hysteresis are provisional, from its noise over its first quiet second;
without a stated direction (info line, profile, `--polarity`) it learns it from its first touch. Until
then it reports no touch. ALGORITHM.md, "Provisional settings" and "Polarity learned from the first
touch".
"""

from __future__ import annotations

from collections import deque
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, replace

import numpy as np

from processing.boardtime import BoardClock
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
    MAX_OUT_S,
    READY,
    Learned,
    Lost,
    Measured,
    Startup,
    Transition,
    settings_for_engine,
)
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

# Where a channel's polarity came from, strongest first: a live edit, --polarity, the board's info
# line, the profile, learned from the first touch.
EDITED, COMMAND_LINE, BOARD, PROFILE, LEARNED = "edited", "command line", "board", "profile", "learned"
_RANK = {EDITED: 0, COMMAND_LINE: 1, BOARD: 2, PROFILE: 3, LEARNED: 4}
LIST_NOTICE_CHANNELS = 8  # a notice names the channels one by one up to this many ...
LIST_EACH = 3  # ... and gives each one's provisional settings up to this many


def sign_text(sign: int | None) -> str:
    return "?" if sign is None else "+" if sign > 0 else "-"


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


def _expand(signs: Sequence[int], channels: int) -> list[int] | None:
    """One sign for all channels, or one per channel; None when the count does not fit."""
    if len(signs) == 1:
        return [int(signs[0])] * channels
    return [int(s) for s in signs] if len(signs) == channels else None


def _slice(block: FrameBlock, a: int, b: int) -> FrameBlock:
    if a == 0 and b == len(block):
        return block
    bt = block.board_time[a:b] if block.board_time is not None else None
    return FrameBlock(block.t_s[a:b], block.seq[a:b], block.readings[a:b], block.first_index + a, bt)


class Session:
    """Owns one board's engine, measures, groups and sliders. Not thread-safe: call from one thread.

    `polarity` is the command line's `--polarity` (one sign for all channels or one per channel)."""

    def __init__(self, profile: Profile | None = None, *, window_s: float = 2.0, history_frames: int = 8192,
                 bounds: VerdictBounds | None = None, plain: bool = False,
                 settle_s: float = SETTLE_S, polarity: Sequence[int] = ()) -> None:
        self.requested_profile = profile
        self.window_s, self.history_frames, self.bounds, self.plain = window_s, history_frames, bounds, plain
        self.settle_s = settle_s  # the noise window's guard around touch activity (processing.measure)
        self.forced_polarity = tuple(int(p) for p in polarity)
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
        assert self._profile is not None
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
        for c, s in self._provisional.get(p.channels, {}).items():
            if self.provisional(c):
                out = out.with_settings(c, s)
        return out

    def _check_channel(self, channel: int) -> None:
        if self.engine is None or self._profile is None:
            raise ValueError("no board yet: settings can be changed once frames arrive")
        if not 0 <= channel < self.engine.channels:
            raise ValueError(f"no channel {channel}: the board has {self.engine.channels}")

    # ------------------------------------------------------------ events
    def handle(self, events: Iterable[Event]) -> list[DetectionEvent]:
        out: list[DetectionEvent] = []
        for ev in events:
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
                self.notices.append(f"board now has {ev.channels} channels (was {ev.old_channels})")
                self._build(ev.channels)
        self._tell_provisional()
        return out

    def _frames(self, block: FrameBlock) -> list[DetectionEvent]:
        if len(block) == 0:
            return []
        if self.engine is None or self.engine.channels != block.channels:
            if self.engine is not None:
                self.notices.append(f"frames now have {block.channels} channels (was {self.engine.channels})")
            self._build(block.channels)
        assert self.engine is not None and self.measures is not None
        if block.board_time is not None:
            self._board_time(block)
        steps: list[Transition] = []
        if self.startup is not None and self.startup.busy:
            steps = self.startup.advance(block.readings, block.t_s)
        found: list[DetectionEvent] = []
        parts: list[tuple[np.ndarray, np.ndarray]] = []
        start = i = 0
        while i < len(steps):  # run the engine up to each transition's frame, apply it, go on
            stop = steps[i].row + 1
            found.extend(self._run(_slice(block, start, stop)))
            parts.append((self.engine.last_deltas, self.engine.last_states))
            while i < len(steps) and steps[i].row + 1 == stop:
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

    def _run(self, block: FrameBlock) -> list[DetectionEvent]:
        assert self.engine is not None and self.measures is not None
        found: list[DetectionEvent] = list(self.engine.process(block))
        deltas, states = self.engine.last_deltas, self.engine.last_states
        self.measures.ingest(block.t_s, block.readings, deltas, states,
                             restart=self._new_zeros(block.first_index, found))
        for tracker in (*self.groups, *self.sliders):
            found.extend(tracker.update(block.first_index, block.t_s, deltas, states))
        if len(self.groups) + len(self.sliders):
            found.sort(key=lambda e: e.index)
        return found

    @staticmethod
    def _new_zeros(first_index: int, found: list[DetectionEvent]) -> dict[int, int]:
        """Per channel, the first row of the block measured against a new baseline: older deltas are not its
        noise. A re-baselined frame has delta 0 already; a stuck release's frame still the old delta."""
        rows: dict[int, int] = {}
        for ev in found:
            if isinstance(ev, Rebaselined):
                rows[ev.channel] = ev.index - first_index
            elif isinstance(ev, StuckRelease):
                rows[ev.channel] = ev.index - first_index + 1
        return rows

    # ------------------------------------------------------------ first contact
    def _transition(self, step: Transition) -> None:
        assert self.engine is not None and self._profile is not None and self.startup is not None
        c, name = step.channel, self._profile.names[step.channel]
        if isinstance(step, Measured):
            if self.provisional(c):
                width = self.engine.channels
                self._provisional.setdefault(width, {})[c] = step.settings
                self._profile = self._profile.with_settings(c, step.settings)
                self._edited[width] = self._profile
                self._measured.append(step)
            if step.quietest:
                self.notices.append(f"{name}: no quiet {QUIET_S:g} s within 10 s of frames: settings from "
                                    f"the quietest second seen (noise {step.stats.pp_counts} counts pp)")
            if step.ready:
                self._enable(c)
        elif isinstance(step, Learned):
            self._tell_provisional()  # in the order they happened
            self._apply_polarity(c, step.sign, LEARNED)
            moves = "rise" if step.sign > 0 else "fall"
            self.notices.append(f"{name}: counts {moves} on touch: polarity {sign_text(step.sign)}")
        elif isinstance(step, Lost) and ("lost", c) not in self._said:
            self._said.add(("lost", c))
            self.notices.append(f"{name}: a change of {step.swing_counts} counts did not come back within "
                                f"{MAX_OUT_S:g} s, so it was no touch: measuring its quiet level again")

    def _enable(self, channel: int) -> None:
        """The channel is READY: its real settings from now on, from a fresh baseline."""
        assert self.engine is not None and self._profile is not None
        self.engine.set_settings(channel, self._profile.settings_for(channel))
        self.engine.rebaseline(channel)

    def _apply_polarity(self, channel: int, sign: int, source: str) -> None:
        assert self.engine is not None
        changed = self.polarity[channel] != sign
        self.polarity[channel], self.polarity_source[channel] = sign, source
        if source in (EDITED, LEARNED):
            self._known_polarity.setdefault(self.engine.channels, {})[channel] = (sign, source)
        if changed or source in (EDITED, LEARNED):
            self.engine.set_polarity(channel, sign)  # re-baselines it
        became_ready = self.startup is not None and self.startup.polarity_given(channel)
        if became_ready or source == LEARNED:  # (a learned one: the startup made it READY already)
            self._enable(channel)
        self._sync_polarity()

    def _forget_polarity(self, channel: int) -> None:
        assert self.engine is not None and self._profile is not None
        self.polarity[channel] = self.polarity_source[channel] = None
        self._known_polarity.get(self.engine.channels, {}).pop(channel, None)
        if self.startup is None:
            width = self.engine.channels
            self.startup = Startup(width, [False] * width, [False] * width, self._declared_rate())
        self.startup.relearn(channel)
        self.engine.set_settings(channel, settings_for_engine(self._profile.settings_for(channel), False))
        self._sync_polarity()

    def _sync_polarity(self) -> None:
        """The profile carries the polarity once every channel's is known (a profile lists all or none)."""
        if self._profile is None:
            return
        known = all(p is not None for p in self.polarity) and len(self.polarity) == self._profile.channels
        self._profile = replace(self._profile, polarity=tuple(int(p) for p in self.polarity) if known else ())

    def _tell_provisional(self) -> None:
        """One notice for the provisional settings taken in this call (a summary for many channels)."""
        if not self._measured or self._profile is None:
            return
        taken, self._measured = self._measured, []
        names = self._profile.names
        if len(taken) <= LIST_EACH:
            each = ", ".join(f"{names[m.channel]} threshold {m.settings.threshold_counts} hysteresis "
                             f"{m.settings.hysteresis_counts} (noise {m.stats.pp_counts} pp)" for m in taken)
        else:
            thr = _span([m.settings.threshold_counts for m in taken])
            hys = _span([m.settings.hysteresis_counts for m in taken])
            pp = _span([m.stats.pp_counts for m in taken])
            each = f"{len(taken)} channels, threshold {thr} counts, hysteresis {hys} (noise {pp} counts pp)"
        debounce = taken[0].settings.touch_debounce_frames
        self.notices.append(f"provisional settings from the quiet noise: {each}; debounce {debounce} frames. "
                            "Edit a key, run the guided capture or load a profile to replace them")

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

    def _board_polarity(self, info: BoardInfo) -> None:
        """A new polarity from the board's info line: it wins over the profile and a learned one."""
        assert self.engine is not None and self._profile is not None
        signs = _expand(info.polarity, self.engine.channels)
        if signs is None:
            return
        for c, sign in enumerate(signs):
            source = self.polarity_source[c]
            if source is not None and _RANK[source] < _RANK[BOARD]:
                continue  # a live edit or --polarity stays
            if source == LEARNED and self.polarity[c] != sign:
                self.notices.append(f"{self._profile.names[c]}: the board says polarity {sign_text(sign)} "
                                    f"(learned {sign_text(self.polarity[c])}): using {sign_text(sign)}")
            self._known_polarity.get(self.engine.channels, {}).pop(c, None)
            self._apply_polarity(c, sign, BOARD)

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
        cls = PlainEngine if self.plain else Engine
        self.engine = cls(channels, [settings_for_engine(profile.settings_for(c), ready[c])
                                     for c in range(channels)], [p or 1 for p in self.polarity])
        self.measures = Measures(channels, rate or DEFAULT_RATE_HZ, self.window_s, self.history_frames,
                                 bounds=self.bounds, settle_s=self.settle_s)
        self._rate_declared = self._rate_from_info = rate is not None
        if self.startup is not None and not self._rate_declared and self._clock.rate_hz is not None:
            self.measures.rate_hz, self._rate_declared = self._clock.rate_hz, True
            self.startup.rate_hz = self._clock.rate_hz
        self.groups = [ExclusiveGroup(g) for g in profile.groups]
        self.sliders = [Slider(s) for s in profile.sliders]

    def _resolve_polarity(self, channels: int, info: BoardInfo | None,
                          profile: Profile) -> tuple[list[int | None], list[str | None]]:
        """Each channel's polarity and its source, strongest source first (see _RANK)."""
        given: dict[str, list[int] | None] = {
            COMMAND_LINE: _expand(self.forced_polarity, channels) if self.forced_polarity else None,
            BOARD: _expand(info.polarity, channels) if info and info.polarity else None,
            PROFILE: list(profile.polarity) if len(profile.polarity) == channels else None,
        }
        if self.forced_polarity and given[COMMAND_LINE] is None and ("cli-width", channels) not in self._said:
            self._said.add(("cli-width", channels))
            self.notices.append(f"--polarity lists {len(self.forced_polarity)} signs but the board has "
                                f"{channels} channels: not used (give one sign, or one per channel)")
        cli, board = given[COMMAND_LINE], given[BOARD]
        if cli is not None and board is not None and cli != board \
                and ("cli-board", channels) not in self._said:
            self._said.add(("cli-board", channels))
            differ = [profile.names[c] for c in range(channels) if cli[c] != board[c]]
            self.notices.append(f"--polarity differs from the board's info line for {_listed(differ)}: "
                                "using --polarity")
        known = self._known_polarity.get(channels, {})
        polarity: list[int | None] = []
        sources: list[str | None] = []
        for c in range(channels):
            options = [(known[c][1], known[c][0])] if c in known else []
            options += [(source, signs[c]) for source, signs in given.items() if signs is not None]
            if options:
                source, sign = min(options, key=lambda o: _RANK[o[0]])
                polarity.append(sign)
                sources.append(source)
            else:
                polarity.append(None)
                sources.append(None)
        return polarity, sources

    def _tell_learning(self, names: Sequence[str]) -> None:
        unknown = [names[c] for c, p in enumerate(self.polarity) if p is None]
        key = ("learning", tuple(unknown))
        if not unknown or key in self._said:
            return
        self._said.add(key)
        which = "" if len(unknown) == len(names) else f" for {_listed(unknown)}"
        self.notices.append(f"no polarity given{which} (no info line, profile or "
                            "--polarity): touch each key once and let go, so padtune learns which way its "
                            "counts move; it reports no touch until then")


def _span(values: Sequence[int]) -> str:
    lo, hi = min(values), max(values)
    return f"{lo}" if lo == hi else f"{lo}..{hi}"


def _listed(names: Sequence[str]) -> str:
    if len(names) > LIST_NOTICE_CHANNELS:
        return f"{len(names)} channels ({', '.join(names[:3])}, ...)"
    return ", ".join(names)

