"""Who touches what and when: the board's script (looped), random touches, and interactive presses.

Everything that touches the simulated panel becomes a `Contact`, which is also the ground truth tests
compare detections with (`SimBoard.scripted_touches()`). A contact has a start and an end in simulated
seconds and a list of (channel, share) pairs: how much of the fingertip lies over each pad.
"""

from __future__ import annotations

import bisect
import math
from dataclasses import dataclass

import numpy as np

from devices.spec import BoardSpec, ScriptTouch

RAMP_S = 0.03  # a finger arrives and leaves over some tens of milliseconds, not in one frame
MAX_HISTORY = 100_000  # random touches and presses kept as ground truth; older ones are forgotten


@dataclass(frozen=True, slots=True)
class Contact:
    kind: str  # "finger", "swipe", "water"
    names: tuple[str, ...]
    channels: tuple[int, ...]
    start_s: float
    end_s: float  # math.inf while an interactive press is held
    strength: float = 1.0
    source: str = "script"  # "script", "random", "press", "stuck"
    slider: str | None = None
    from_pos: float = 0.0
    to_pos: float = 0.0
    wet_area_m2: float = 0.0
    body_f: float | None = None  # the person's capacitance to ground; None: the board's default

    @property
    def hold_s(self) -> float:
        return self.end_s - self.start_s

    def envelope(self, t_s: np.ndarray) -> np.ndarray:
        """0..1 presence over time, with short ramps at both ends."""
        rise = np.clip((t_s - self.start_s) / RAMP_S, 0.0, 1.0)
        if math.isinf(self.end_s):
            return rise
        return rise * np.clip((self.end_s - t_s) / RAMP_S, 0.0, 1.0)

    def shares(self, t_s: np.ndarray) -> np.ndarray:
        """Fraction of the contact over each of `channels`, shape (len(t_s), len(channels))."""
        n = len(self.channels)
        if self.kind != "swipe":
            return np.ones((len(t_s), n))
        # Along a slider the finger covers the two pads nearest its position, in proportion.
        progress = np.clip((t_s - self.start_s) / max(self.hold_s, 1e-9), 0.0, 1.0)
        x = (self.from_pos + (self.to_pos - self.from_pos) * progress) * (n - 1)
        return np.clip(1.0 - np.abs(x[:, None] - np.arange(n)[None, :]), 0.0, 1.0)


def _from_script(spec: BoardSpec, t: ScriptTouch, offset_s: float) -> Contact:
    return Contact(t.kind, t.pads, tuple(spec.channel_index(p) for p in t.pads), t.at_s + offset_s,
                   t.at_s + offset_s + t.hold_s, t.strength, "script", t.slider, t.from_pos, t.to_pos,
                   t.wet_area_m2, t.body_f)


MAX_PAUSES = 64  # hands-off spans remembered (bounded memory; older ones are long past)


class TouchPlan:
    """The contacts of one run: expands the looped script and draws random touches lazily, seeded."""

    def __init__(self, spec: BoardSpec, seed: int, script: bool = True, random_per_min: float | None = None):
        self.spec = spec
        self.script = script and bool(spec.script)
        self.random_per_min = spec.random.per_min if random_per_min is None else random_per_min
        self._rng = np.random.default_rng([seed, 0x70C4])
        self._random: list[Contact] = []  # in time order, one after another: ends rise with starts
        self._random_ends: list[float] = []
        self._random_until_s = 0.0
        self._next_random_s = self._gap_s()
        self.presses: list[Contact] = []
        # Spans of simulated time (end inf while it lasts) in which a host asked for hands off
        # (`script off`): scripted and random contacts starting there do not happen; presses still do.
        self._paused: list[list[float]] = []
        slider_pads = {p for s in spec.sliders for p in s.pads}
        self._random_pads = spec.random.pads or tuple(n for n in spec.names if n not in slider_pads)

    def _gap_s(self) -> float:
        if self.random_per_min <= 0:
            return math.inf
        return float(self._rng.exponential(60.0 / self.random_per_min))

    def _extend_random(self, until_s: float) -> None:
        r = self.spec.random
        while self._next_random_s < until_s:
            start = self._next_random_s
            hold = float(self._rng.uniform(r.hold_min_s, r.hold_max_s))
            strength = float(self._rng.uniform(r.strength_min, r.strength_max))
            name = self._random_pads[int(self._rng.random() * len(self._random_pads))]
            self._random.append(Contact("finger", (name,), (self.spec.channel_index(name),), start,
                                        start + hold, strength, "random"))
            self._random_ends.append(start + hold)
            self._next_random_s = start + hold + self._gap_s()
        if len(self._random) > MAX_HISTORY:
            del self._random[: len(self._random) - MAX_HISTORY]
            del self._random_ends[: len(self._random_ends) - MAX_HISTORY]
        self._random_until_s = max(self._random_until_s, until_s)

    def scripted(self, start_s: float, end_s: float) -> list[Contact]:
        if not self.script:
            return []
        if not self.spec.loop_s:
            return [_from_script(self.spec, t, 0.0) for t in self.spec.script]
        out = []
        first = max(0, int(start_s // self.spec.loop_s) - 1)
        last = int(end_s // self.spec.loop_s) + 1
        for k in range(first, last + 1):
            out.extend(_from_script(self.spec, t, k * self.spec.loop_s) for t in self.spec.script)
        return out

    def overlapping(self, start_s: float, end_s: float) -> list[Contact]:
        """Every contact that touches the time span [start_s - ramp, end_s + ramp]."""
        self._extend_random(end_s + RAMP_S)
        lo, hi = start_s - RAMP_S, end_s + RAMP_S
        recent = self._random[bisect.bisect_left(self._random_ends, lo):]
        pool = self._unpaused(self.scripted(start_s, end_s) + recent) + self.presses
        return [c for c in pool if c.start_s <= hi and c.end_s >= lo]

    @property
    def paused(self) -> bool:
        return bool(self._paused) and self._paused[-1][1] == math.inf

    def pause_automatic(self, t_s: float) -> None:
        if not self.paused:
            self._paused.append([t_s, math.inf])
            del self._paused[:-MAX_PAUSES]

    def resume_automatic(self, t_s: float) -> None:
        if self.paused:
            self._paused[-1][1] = t_s

    def _unpaused(self, contacts: list[Contact]) -> list[Contact]:
        if not self._paused:
            return contacts
        return [c for c in contacts if not any(a <= c.start_s < b for a, b in self._paused)]

    def truth(self, until_s: float) -> list[Contact]:
        """Ground truth: every contact that started by `until_s`, in start order."""
        self._extend_random(until_s)
        pool = self._unpaused(self.scripted(0.0, until_s) + self._random) + self.presses
        return sorted((c for c in pool if c.start_s <= until_s), key=lambda c: (c.start_s, c.channels))

    def press(self, channel: int, t_s: float, strength: float) -> None:
        self.release(channel, t_s)
        if len(self.presses) > MAX_HISTORY:  # forget the oldest finished presses, never a held one
            held = [c for c in self.presses if math.isinf(c.end_s)]
            done = [c for c in self.presses if not math.isinf(c.end_s)]
            self.presses = held + done[len(done) - MAX_HISTORY:]
        name = self.spec.names[channel]
        self.presses.append(Contact("finger", (name,), (channel,), t_s, math.inf, strength, "press"))

    def release(self, channel: int, t_s: float) -> bool:
        for i, c in enumerate(self.presses):
            if c.channels == (channel,) and math.isinf(c.end_s):
                self.presses[i] = Contact(c.kind, c.names, c.channels, c.start_s, max(t_s, c.start_s),
                                          c.strength, "press")
                return True
        return False

    def held(self) -> list[str]:
        return [c.names[0] for c in self.presses if math.isinf(c.end_s)]
