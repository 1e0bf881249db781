"""The C firmware library as a `processing.Session` engine: `replay --engine firmware` runs on it.

`FirmwareEngine` has the Python engines' API (`process`, `rebaseline`, `set_settings`, `set_polarity`,
`readings`, `baselines_fp`, `deltas`, `states`, `frames`, `last_deltas`, `last_states`) and also runs the
profile's exclusive groups and sliders inside the library (`runs_groups`), the way a board would. The
library's events are mapped to processing's `DetectionEvent`s (this module sits in `tui` because
`devices` may not import `processing`), so everything after the engine, the output lines included, is
the same code as with the Python engine.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from devices.firmware import clib
from processing.detections import (
    DetectionEvent,
    GroupChange,
    KeyState,
    Rebaselined,
    Release,
    SliderChange,
    StuckRelease,
    Touch,
)
from processing.groups import GroupSpec
from processing.profile import Profile
from processing.settings import ChannelSettings
from protocol.errors import UserError
from protocol.events import FrameBlock


class FirmwareEngine:
    """One board's detection through the compiled C library (devices.firmware.clib)."""

    runs_groups = True

    def __init__(self, channels: int, settings: Sequence[ChannelSettings], polarity: Sequence[int],
                 groups: Sequence[GroupSpec] = (), sliders: Sequence = ()) -> None:
        if len(settings) != channels or len(polarity) != channels:
            raise ValueError(f"need {channels} settings and polarities, "
                             f"got {len(settings)} and {len(polarity)}")
        for s in settings:
            s.check()
        self.channels = channels
        self.settings = list(settings)
        self.group_names = [g.name for g in groups]
        self.slider_names = [s.name for s in sliders]
        self.lib = clib.FirmwareDetector(
            self.settings, polarity, [(g.members, g.switch_margin_counts) for g in groups],
            [(s.pads, s.wheel, s.resolution) for s in sliders])
        self.touch_t_s = [0.0] * channels  # host time of each key's touch, for held_s (as the Python engines)
        self._readings = [0] * channels
        self.last_deltas = np.zeros((0, channels), np.int64)
        self.last_states = np.zeros((0, channels), np.int8)

    def process(self, block: FrameBlock) -> list[DetectionEvent]:
        if block.channels != self.channels:
            raise ValueError(f"block has {block.channels} channels, engine {self.channels}")
        try:
            raw = self.lib.run(block.readings)
        except ValueError as exc:
            raise UserError(f"firmware engine: {exc}") from exc
        self.last_deltas, self.last_states = self.lib.last_deltas, self.lib.last_states
        if len(block):
            self._readings = block.readings[-1].tolist()
        times = block.t_s.tolist()
        return [self._event(ev, block.first_index + ev.row, times[ev.row]) for ev in raw]

    def _event(self, ev: clib.RawEvent, index: int, t_s: float) -> DetectionEvent:
        c = ev.source
        if ev.kind == clib.TOUCH:
            self.touch_t_s[c] = t_s
            return Touch(c, index, t_s, ev.delta_counts)
        if ev.kind == clib.RELEASE:
            return Release(c, index, t_s, t_s - self.touch_t_s[c], ev.held_frames, ev.delta_counts)
        if ev.kind == clib.STUCK:
            return StuckRelease(c, index, t_s, t_s - self.touch_t_s[c], ev.held_frames, ev.delta_counts)
        if ev.kind == clib.REBASELINED:
            return Rebaselined(c, index, t_s, bool(ev.value))
        if ev.kind == clib.GROUP:
            return GroupChange(self.group_names[c], index, t_s, ev.value)
        if ev.kind == clib.SLIDER:
            return SliderChange(self.slider_names[c], index, t_s, ev.value, ev.value is not None)
        raise RuntimeError(f"the firmware library reported an unknown event kind {ev.kind}")

    def rebaseline(self, channel: int | None = None) -> None:
        self.lib.rebaseline(channel)

    def set_settings(self, channel: int, s: ChannelSettings) -> None:
        s.check()
        self.lib.set_settings(channel, s)
        self.settings[channel] = s

    def set_polarity(self, channel: int, polarity: int) -> None:
        self.lib.set_polarity(channel, polarity)

    @property
    def polarity(self) -> list[int]:
        return self.lib.polarity

    @property
    def frames(self) -> int:
        return self.lib.frames

    @property
    def readings(self) -> list[int]:
        return list(self._readings)

    @property
    def baselines_fp(self) -> list[int]:
        return self.lib.baselines_fp

    @property
    def deltas(self) -> list[int]:
        return self.lib.deltas

    @property
    def states(self) -> list[KeyState]:
        return [KeyState(v) for v in self.lib.states]


def check_firmware() -> None:
    """Build and load the library now (raises `clib.FirmwareUnavailable`, a one-line UserError)."""
    clib.check_available()


def firmware_engine(channels: int, settings: list[ChannelSettings], polarity: list[int],
                    profile: Profile) -> FirmwareEngine:
    """A `processing.session.EngineFactory`: the C library with the profile's groups and sliders."""
    return FirmwareEngine(channels, settings, polarity, profile.groups, profile.sliders)
