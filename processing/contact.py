"""A session's first contact with each channel: where its polarity comes from, what the startup's
transitions do, and the notices that tell the user. A mixin of `processing.session.Session` (split
from it to keep each file about one thing).

Without tuned settings a channel's are provisional (its quiet second); without a stated direction it
learns it from its first touch that comes back (`processing.startup`). ALGORITHM.md, "First contact".
"""

from __future__ import annotations

from collections import deque
from collections.abc import Sequence
from dataclasses import replace
from typing import TYPE_CHECKING

from processing.profile import Profile
from processing.provisional import QUIET_S
from processing.settings import ChannelSettings
from processing.startup import (
    GIVE_UP_S,
    MAX_OUT_S,
    Learned,
    Lost,
    Measured,
    Startup,
    Transition,
    settings_for_engine,
)
from protocol.events import BoardInfo

if TYPE_CHECKING:
    from processing.engine import Engine
    from processing.reference import PlainEngine

# Where a channel's polarity came from, strongest first: a live edit, --polarity, the board's info
# line, the profile, learned from the first touch.
EDITED, COMMAND_LINE, BOARD, PROFILE, LEARNED = "edited", "command line", "board", "profile", "learned"
_RANK = {EDITED: 0, COMMAND_LINE: 1, BOARD: 2, PROFILE: 3, LEARNED: 4}
LIST_NOTICE_CHANNELS = 8  # a notice names the channels one by one up to this many ...
LIST_EACH = 3  # ... and gives each one's provisional settings up to this many


def sign_text(sign: int | None) -> str:
    return "?" if sign is None else "+" if sign > 0 else "-"


def _expand(signs: Sequence[int], channels: int) -> list[int] | None:
    """One sign for all channels, or one per channel; None when the count does not fit."""
    if len(signs) == 1:
        return [int(signs[0])] * channels
    return [int(s) for s in signs] if len(signs) == channels else None


def _span(values: Sequence[int]) -> str:
    lo, hi = min(values), max(values)
    return f"{lo}" if lo == hi else f"{lo}..{hi}"


def _listed(names: Sequence[str]) -> str:
    if len(names) > LIST_NOTICE_CHANNELS:
        return f"{len(names)} channels ({', '.join(names[:3])}, ...)"
    return ", ".join(names)


class FirstContact:
    """Needs from the session: `engine`, `startup`, `notices`, `polarity`, `polarity_source`,
    `forced_polarity`, `_profile`, `_edited`, `_provisional`, `_known_polarity`, `_said`, `_measured`,
    `provisional()` and `_declared_rate()`."""

    if TYPE_CHECKING:  # provided by Session
        engine: Engine | PlainEngine | None
        startup: Startup | None
        notices: deque[str]
        polarity: list[int | None]
        polarity_source: list[str | None]
        forced_polarity: tuple[int, ...]
        _profile: Profile | None
        _edited: dict[int, Profile]
        _provisional: dict[int, dict[int, ChannelSettings]]
        _known_polarity: dict[int, dict[int, tuple[int, str]]]
        _said: set[object]
        _measured: list[Measured]

        def provisional(self, channel: int) -> bool: ...
        def _declared_rate(self) -> float | None: ...

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
                self.notices.append(f"{name}: no quiet {QUIET_S:g} s within {GIVE_UP_S:g} s of frames: "
                                    f"settings from the quietest second seen (noise {step.stats.pp_counts} "
                                    "counts pp)")
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
        frames = f"{debounce} frame" if debounce == 1 else f"{debounce} frames"
        self.notices.append(f"provisional settings from the quiet noise: {each}; debounce {frames}. "
                            "Edit a key, run the guided capture or load a profile to replace them")

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
