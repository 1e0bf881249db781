"""The plain reference detector: one frame, one channel at a time, in Python ints (ALGORITHM.md).

`step` and `period_end` are the algorithm itself, written to read like the C library will. `PlainEngine`
loops them over every frame and channel; the fast `Engine` (engine.py) calls the same `step` for the
channels it cannot settle in bulk, and is proven identical to `PlainEngine` by property tests.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from processing.detections import DetectionEvent, KeyState, Rebaselined, Release, StuckRelease, Touch
from processing.fixed import FRAC_BITS, ONE_FP, tdiv_pow2
from processing.settings import ChannelSettings
from protocol.events import FrameBlock

RELEASED, CONFIRMING, TOUCHED, RELEASING = (int(s) for s in KeyState)


class ChannelState:
    """Everything the detector remembers about one channel (the C struct has the same fields)."""

    __slots__ = ("acc", "baseline_fp", "clean", "count", "delta", "held", "pending", "reading", "state",
                 "touch_t_s")

    def __init__(self) -> None:
        self.baseline_fp = 0  # baseline in counts * 2**FRAC_BITS
        self.state = RELEASED
        self.count = 0  # consecutive frames counted toward the pending touch or release
        self.held = 0  # frames since the touch was reported
        self.acc = 0  # sum of readings of the current baseline period (released frames only)
        self.clean = False  # every frame of the current period so far was released
        self.pending = True  # take the next reading as the baseline
        self.reading = 0
        self.delta = 0
        self.touch_t_s = 0.0


def step(ch: ChannelState, s: ChannelSettings, polarity: int, reading: int, channel: int, index: int,
         t_s: float) -> DetectionEvent | None:
    """Advance one channel by one frame (ALGORITHM.md, steps 1-4). Returns the event, if any."""
    event: DetectionEvent | None = None
    ch.reading = reading
    if ch.pending:
        was = ch.state in (TOUCHED, RELEASING)
        ch.baseline_fp = reading * ONE_FP
        ch.state, ch.count, ch.held, ch.acc, ch.clean, ch.pending = RELEASED, 0, 0, 0, False, False
        event = Rebaselined(channel, index, t_s, was)
    delta = tdiv_pow2(polarity * (reading * ONE_FP - ch.baseline_fp), FRAC_BITS)
    ch.delta = delta
    st = ch.state
    if st in (RELEASED, CONFIRMING):
        if delta >= s.threshold_counts:
            ch.count = ch.count + 1 if st == CONFIRMING else 1
            if ch.count >= s.touch_debounce_frames:
                ch.state, ch.count, ch.held, ch.touch_t_s = TOUCHED, 0, 0, t_s
                event = Touch(channel, index, t_s, delta)
            else:
                ch.state = CONFIRMING
        else:
            ch.state, ch.count = RELEASED, 0
    else:
        ch.held += 1
        if delta < s.threshold_counts - s.hysteresis_counts:
            ch.count = ch.count + 1 if st == RELEASING else 1
            if ch.count >= s.release_debounce_frames:
                ch.state, ch.count = RELEASED, 0
                event = Release(channel, index, t_s, t_s - ch.touch_t_s, ch.held, delta)
            else:
                ch.state = RELEASING
        else:
            ch.state, ch.count = TOUCHED, 0
        if ch.state != RELEASED and s.stuck_timeout_frames and ch.held >= s.stuck_timeout_frames:
            event = StuckRelease(channel, index, t_s, t_s - ch.touch_t_s, ch.held, delta)
            ch.baseline_fp = reading * ONE_FP
            ch.state, ch.count, ch.clean = RELEASED, 0, False
    if ch.state == RELEASED:
        ch.acc += reading
    else:
        ch.clean = False
    return event


def period_end(ch: ChannelState, s: ChannelSettings, polarity: int) -> None:
    """End of a baseline period (ALGORITHM.md, step 5): follow the period mean if it was all released."""
    if ch.clean:
        mean_fp = ch.acc * (1 << (FRAC_BITS - s.period_exp))
        diff = mean_fp - ch.baseline_fp
        shift = s.baseline_slow_shift if polarity * diff > 0 else s.baseline_fast_shift
        ch.baseline_fp += tdiv_pow2(diff, shift)
    ch.acc, ch.clean = 0, True


class PlainEngine:
    """Per-frame, per-channel reference engine. Same API and results as `processing.engine.Engine`."""

    def __init__(self, channels: int, settings: Sequence[ChannelSettings], polarity: Sequence[int]) -> None:
        if len(settings) != channels or len(polarity) != channels:
            raise ValueError(f"need {channels} settings and polarities, "
                             f"got {len(settings)} and {len(polarity)}")
        for s in settings:
            s.check()
        if any(p not in (1, -1) for p in polarity):
            raise ValueError(f"polarity must be +1 or -1 per channel, not {list(polarity)}")
        self.channels = channels
        self.settings = list(settings)
        self.polarity = [int(p) for p in polarity]
        self.chans = [ChannelState() for _ in range(channels)]
        self.frames = 0  # frames processed: the period clock of ALGORITHM.md
        self.last_deltas = np.zeros((0, channels), np.int64)
        self.last_states = np.zeros((0, channels), np.int8)

    def process(self, block: FrameBlock) -> list[DetectionEvent]:
        if block.channels != self.channels:
            raise ValueError(f"block has {block.channels} channels, engine {self.channels}")
        events: list[DetectionEvent] = []
        n = len(block)
        deltas = np.zeros((n, self.channels), np.int64)
        states = np.zeros((n, self.channels), np.int8)
        rows = block.readings.tolist()
        times = block.t_s.tolist()
        for i in range(n):
            index, t_s, row = block.first_index + i, times[i], rows[i]
            clock = self.frames
            for c in range(self.channels):
                ch, s, pol = self.chans[c], self.settings[c], self.polarity[c]
                ev = step(ch, s, pol, row[c], c, index, t_s)
                if ev is not None:
                    events.append(ev)
                if clock & (s.baseline_period_frames - 1) == s.baseline_period_frames - 1:
                    period_end(ch, s, pol)
                deltas[i, c] = ch.delta
                states[i, c] = ch.state
            self.frames += 1
        self.last_deltas, self.last_states = deltas, states
        return events

    def rebaseline(self, channel: int | None = None) -> None:
        for c in range(self.channels) if channel is None else [channel]:
            self.chans[c].pending = True

    def set_settings(self, channel: int, s: ChannelSettings) -> None:
        s.check()
        self.settings[channel] = s
        self.chans[channel].clean = False  # a changed period must not use a half-counted one

    def set_polarity(self, channel: int, polarity: int) -> None:
        """Turn a channel's direction around (or confirm it): it re-baselines on its next frame."""
        if polarity not in (1, -1):
            raise ValueError(f"polarity must be +1 or -1, not {polarity!r}")
        self.polarity[channel] = polarity
        self.chans[channel].clean = False
        self.chans[channel].pending = True

    @property
    def readings(self) -> list[int]:
        return [ch.reading for ch in self.chans]

    @property
    def baselines_fp(self) -> list[int]:
        return [ch.baseline_fp for ch in self.chans]

    @property
    def deltas(self) -> list[int]:
        return [ch.delta for ch in self.chans]

    @property
    def states(self) -> list[KeyState]:
        return [KeyState(ch.state) for ch in self.chans]
