"""A simulated board's own detector: the C firmware library, run on the readings the board sends.

A board that runs padtune's detector in its firmware (`devices/firmware/`) can send what it decided with
every frame (the state field, PROTOCOL.md section 3). The simulated boards do the same through the
library itself (`devices.firmware.clib`, compiled with the system C compiler on first use), never
through padtune's Python engine: what they send is what a board running the library would send, so
padtune's twin check compares two independent implementations.

The board's detector runs the settings the board holds: on a board that takes PROTOCOL.md section 7's
commands, its settings in force (`devices.board_settings.BoardSettings.live`: the kept or factory ones
at power-up, then whatever `set` changed, applied live as the library's `pt_detect_settings_changed`
does); on one that does not, `DetectorSettings()` on every channel, the same values as a default
profile (`processing.settings.ChannelSettings()`, checked by tests/devices/test_onboard.py). Run
padtune with the board's settings (it reads them from a `settings=1` board) and the two agree. The `deviate`
fault (`devices.faults`) makes the board send one key's state one step on from a given frame, as a
firmware whose state table is off by one would: the twin check must report it.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

from devices.firmware.clib import FirmwareDetector, Settings
from protocol.commands import POLARITY_KEY

STATES = 4  # released, confirming, touched, releasing (processing.detections.KeyState's values)


# One channel's settings in the board's firmware: the library binding's own (the profile's keys and
# defaults, kept equal to processing.settings.ChannelSettings by a test).
DetectorSettings = Settings


class OnBoardDetector:
    """The library's detector for `channels` channels of one `polarity` (+1 or -1); `deviate` maps a
    channel to the first frame (board frame index) whose state it sends one step on. `settings`: each
    channel's settings as the wire's keys (`protocol.commands.WIRE_KEYS`, polarity included), or None
    for `DetectorSettings()` and `polarity` on every channel."""

    def __init__(self, channels: int, polarity: int, deviate: Mapping[int, int] | None = None,
                 settings: Sequence[Mapping[str, int]] | None = None) -> None:
        self.channels, self.polarity = channels, polarity
        self.deviate = {ch: frame for ch, frame in (deviate or {}).items() if ch < channels}
        self._applied: list[dict[str, int]] = []
        self._detector = self._fresh(settings)

    def _fresh(self, settings: Sequence[Mapping[str, int]] | None) -> FirmwareDetector:
        n = self.channels
        if settings is None:
            default = {**DetectorSettings()._asdict(), POLARITY_KEY: self.polarity}
            settings = [default] * n
        self._applied = [dict(s) for s in settings[:n]]
        if len(self._applied) != n:
            raise ValueError(f"settings for {len(self._applied)} channels, the board has {n}")
        return FirmwareDetector([_detector_settings(s) for s in self._applied],
                                [s[POLARITY_KEY] for s in self._applied])

    def restart(self, channels: int | None = None,
                settings: Sequence[Mapping[str, int]] | None = None) -> None:
        """The board restarted (or now has `channels` channels): a fresh detector, whose baselines come
        from the next frame, running `settings` (None: the defaults, as at construction without any)."""
        if channels is not None:
            self.channels = channels
        self._detector = self._fresh(settings)

    def sync(self, settings: Sequence[Mapping[str, int]]) -> None:
        """Apply the channels whose settings differ from what the detector runs, live (after a `set`):
        the library restarts their baseline period; a turned polarity re-baselines."""
        for c, wanted in enumerate(settings[: self.channels]):
            if dict(wanted) == self._applied[c]:
                continue
            if wanted[POLARITY_KEY] != self._applied[c][POLARITY_KEY]:
                self._detector.set_polarity(c, wanted[POLARITY_KEY])
            self._detector.set_settings(c, _detector_settings(wanted))
            self._applied[c] = dict(wanted)

    def states(self, readings: np.ndarray, first_frame: int) -> np.ndarray:
        """Run the detector on frames `first_frame ...` (their readings, (n, channels)); the state each
        channel is in after each frame, as the board sends it (int8 (n, channels))."""
        self._detector.run(readings)
        states = np.array(self._detector.last_states, dtype=np.int8)
        for ch, from_frame in self.deviate.items():
            start = max(0, from_frame - first_frame)
            if start < len(states):
                states[start:, ch] = (states[start:, ch] + 1) % STATES
        return states


def _detector_settings(values: Mapping[str, int]) -> DetectorSettings:
    """The library's settings for one channel from the wire's keys (polarity goes separately)."""
    return DetectorSettings(**{key: int(values[key]) for key in DetectorSettings._fields})
