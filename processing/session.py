"""The glue every front end uses: protocol events in, detection events and measures out.

`Session.handle(events)` feeds FrameBlocks to the engine, takes names, polarity and frame rate from
BoardInfo, re-baselines on a new session (an info line carrying `proto`) or a board reset, rebuilds for
a new width on BoardChanged, runs groups and sliders, and keeps the measures. Live edits go through
`set_channel_settings`; `profile` always reflects them, ready to save.
"""

from __future__ import annotations

from collections import deque
from collections.abc import Iterable
from dataclasses import dataclass, replace

from processing.detections import DetectionEvent, KeyState, Rebaselined, StuckRelease
from processing.engine import Engine
from processing.fixed import to_counts
from processing.groups import ExclusiveGroup
from processing.measure import SETTLE_S, ChannelQuality, Measures, VerdictBounds
from processing.profile import NAME_RE, Profile, profile_for
from processing.reference import PlainEngine
from processing.settings import ChannelSettings
from processing.slider import Slider
from protocol.events import BoardChanged, BoardInfo, Event, FaultKind, FrameBlock, LinkFault

DEFAULT_RATE_HZ = 100.0  # assumed until the board states its rate or enough frames have arrived to tell


@dataclass(frozen=True, slots=True)
class ChannelRow:
    """One channel as a front end shows it: latest values, settings and quality."""

    channel: int
    name: str
    reading: int
    baseline_counts: int
    delta_counts: int
    state: KeyState
    settings: ChannelSettings
    quality: ChannelQuality


_INFO_KEYS = ("proto", "board", "channels", "rate_hz", "names", "method", "polarity", "fw")


def _merged_info(session: BoardInfo | None, line: BoardInfo) -> BoardInfo:
    """The session's info after `line`: a new session replaces it, any other line updates the keys it has."""
    if session is None or line.new_session:
        return line
    given = {k: getattr(line, k) for k in _INFO_KEYS if getattr(line, k) not in (None, ())}
    return replace(session, t_s=line.t_s, fields={**session.fields, **line.fields}, **given)


class Session:
    """Owns one board's engine, measures, groups and sliders. Not thread-safe: call from one thread."""

    def __init__(self, profile: Profile | None = None, *, window_s: float = 2.0, history_frames: int = 8192,
                 bounds: VerdictBounds | None = None, plain: bool = False,
                 settle_s: float = SETTLE_S) -> None:
        self.requested_profile = profile
        self.window_s, self.history_frames, self.bounds, self.plain = window_s, history_frames, bounds, plain
        self.settle_s = settle_s  # the noise window's guard around touch activity (processing.measure)
        self.info: BoardInfo | None = None
        self.engine: Engine | PlainEngine | None = None
        self.measures: Measures | None = None
        self.groups: list[ExclusiveGroup] = []
        self.sliders: list[Slider] = []
        self.notices: deque[str] = deque(maxlen=50)  # things the user should know (mismatched profile, ...)
        self._profile: Profile | None = profile
        self._edited: dict[int, Profile] = {}  # by width: the profile with live edits, kept across rebuilds
        self._rate_declared = False

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

    def rows(self) -> list[ChannelRow]:
        if self.engine is None or self.measures is None or self._profile is None:
            return []
        e, m, p = self.engine, self.measures, self._profile
        readings, baselines, deltas, states = e.readings, e.baselines_fp, e.deltas, e.states
        quality = m.qualities()
        return [ChannelRow(c, p.names[c], readings[c], to_counts(baselines[c]), deltas[c], states[c],
                           p.settings_for(c), quality[c]) for c in range(e.channels)]

    # ------------------------------------------------------------ commands
    def set_channel_settings(self, channel: int, settings: ChannelSettings) -> None:
        """Apply new settings to one channel now (ValueError names the problem; nothing changes then)."""
        if self.engine is None or self._profile is None:
            raise ValueError("no board yet: settings can be changed once frames arrive")
        if not 0 <= channel < self.engine.channels:
            raise ValueError(f"no channel {channel}: the board has {self.engine.channels}")
        self.engine.set_settings(channel, settings)
        self._profile = self._profile.with_settings(channel, settings)
        self._edited[self._profile.channels] = self._profile

    def apply_profile(self, profile: Profile) -> None:
        """Use a (newly loaded) profile: rebuilds now when the width is known, else on the first frames."""
        self.requested_profile = self._profile = profile
        self._edited.clear()
        if self.engine is not None:
            self._build(self.engine.channels)

    def rebaseline(self, channel: int | None = None) -> None:
        if self.engine is not None:
            self.engine.rebaseline(channel)

    # ------------------------------------------------------------ events
    def handle(self, events: Iterable[Event]) -> list[DetectionEvent]:
        out: list[DetectionEvent] = []
        for ev in events:
            if isinstance(ev, FrameBlock):
                out.extend(self._frames(ev))
            elif isinstance(ev, BoardInfo):
                self._info(ev)
            elif isinstance(ev, LinkFault) and ev.kind == FaultKind.RESET:
                self.notices.append("board reset: baselines taken again")
                self.rebaseline()
            elif isinstance(ev, BoardChanged):
                self.notices.append(f"board now has {ev.channels} channels (was {ev.old_channels})")
                self._build(ev.channels)
        return out

    def _frames(self, block: FrameBlock) -> list[DetectionEvent]:
        if len(block) == 0:
            return []
        if self.engine is None or self.engine.channels != block.channels:
            if self.engine is not None:
                self.notices.append(f"frames now have {block.channels} channels (was {self.engine.channels})")
            self._build(block.channels)
        assert self.engine is not None and self.measures is not None
        found: list[DetectionEvent] = list(self.engine.process(block))
        deltas, states = self.engine.last_deltas, self.engine.last_states
        self.measures.ingest(block.t_s, block.readings, deltas, states,
                             restart=self._new_zeros(block.first_index, found))
        for tracker in (*self.groups, *self.sliders):
            found.extend(tracker.update(block.first_index, block.t_s, deltas, states))
        if len(self.groups) + len(self.sliders):
            found.sort(key=lambda e: e.index)
        self._estimate_rate()
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

    def _info(self, line: BoardInfo) -> None:
        """A line with `proto` starts a new session; one without updates the session's info key by key."""
        old = self.info
        self.info = info = _merged_info(old, line)
        width = info.channels or (len(info.names) or None)
        rebuild = self.engine is None or self.engine.channels != width or self._polarity_changed(old, info)
        if width and rebuild:
            self._build(width)
            return
        self._rename(info)
        if info.rate_hz and self.measures is not None:
            self.measures.rate_hz, self._rate_declared = float(info.rate_hz), True
        if line.new_session and self.engine is not None:
            self.notices.append("new session: baselines taken again")
            self.engine.rebaseline()

    def _rename(self, info: BoardInfo) -> None:
        """Take the board's channel names when they are usable (display only: groups keep indices)."""
        names = tuple(info.names)
        p = self._profile
        if p is None or len(names) != p.channels or names == p.names or len(set(names)) != len(names):
            return
        if all(NAME_RE.match(n) for n in names):
            self._profile = replace(p, names=names)

    @staticmethod
    def _polarity_changed(old: BoardInfo | None, new: BoardInfo) -> bool:
        return bool(new.polarity) and (old is None or tuple(old.polarity) != tuple(new.polarity))

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

    def _build(self, channels: int) -> None:
        """A fresh engine (baselines from the next frame) and measures for `channels` channels."""
        info, wanted = self.info, self._edited.get(channels, self.requested_profile)
        names = tuple(info.names) if info and len(info.names) == channels else ()
        board = (info.board if info else None) or (wanted.board if wanted else "")
        rate = (info.rate_hz if info else None) or (wanted.rate_hz if wanted else None)
        if wanted is not None and wanted.board and info is not None and info.board \
                and info.board != wanted.board:
            self.notices.append(f"profile is for board '{wanted.board}', this board says '{info.board}'")
        if wanted is not None and wanted.channels == channels:
            profile = wanted
            if names and names != wanted.names and all(NAME_RE.match(n) for n in names) \
                    and len(set(names)) == channels:
                profile = replace(wanted, names=names)
        else:
            profile = profile_for(channels, names or (self._profile.names if self._profile
                                                      and self._profile.channels == channels else ()), board)
            if wanted is None and self._profile is None:
                # Untuned defaults rarely fit a real overlay: a key that never reaches the default
                # threshold looks like a dead board unless the user is told why.
                d = profile.defaults
                self.notices.append(f"no profile given: every channel starts at the default settings "
                                    f"(threshold {d.threshold_counts} counts, hysteresis "
                                    f"{d.hysteresis_counts}); measure the keys and save a profile")
            if wanted is not None:
                self.notices.append(f"profile is for {wanted.channels} channels, the board has {channels}: "
                                    "using the profile's defaults for every channel")
                profile = replace(profile, defaults=wanted.defaults, limits=wanted.limits)
        polarity = self._polarity(channels, info, profile)
        profile = replace(profile, rate_hz=rate, board=board or profile.board)
        cls = PlainEngine if self.plain else Engine
        self.engine = cls(channels, profile.all_settings(), polarity)
        self.measures = Measures(channels, rate or DEFAULT_RATE_HZ, self.window_s, self.history_frames,
                                 bounds=self.bounds, settle_s=self.settle_s)
        self._rate_declared = rate is not None
        self.groups = [ExclusiveGroup(g) for g in profile.groups]
        self.sliders = [Slider(s) for s in profile.sliders]
        self._profile = profile

    @staticmethod
    def _polarity(channels: int, info: BoardInfo | None, profile: Profile) -> list[int]:
        if info and info.polarity:
            pol = list(info.polarity) * channels if len(info.polarity) == 1 else list(info.polarity)
            if len(pol) == channels:
                return pol
        if len(profile.polarity) == channels:
            return list(profile.polarity)
        return [1] * channels
