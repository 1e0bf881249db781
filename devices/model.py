"""The simulated sensor itself: capacitance of every pad at every frame, then the reading. Pure numpy.

Frame k is taken at t = k / rate_hz. Random parts (white noise, counter phase, post-conversion noise)
come from a generator seeded by (seed, chunk number), so frame k reads the same whether it is generated
alone or inside a large block: runs repeat exactly for a seed, and a block costs a few numpy calls
whatever the channel count.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from devices import physics
from devices.spec import BoardSpec
from devices.touches import Contact, TouchPlan

CHUNK_FRAMES = 256
OPEN_PAD_F = 2e-12  # an open pad leaves only the pin and a stub of trace
SHORTED_PAD_F = 1e-6  # a pad shorted to ground looks like an enormous capacitor
MIN_PAD_F = 0.1e-12


@dataclass(slots=True)
class UnitFaults:
    """Faults of the board itself (production checks), by channel index."""

    open_pads: set[int] = field(default_factory=set)
    shorted_pads: set[int] = field(default_factory=set)
    noisy_pads: dict[int, float] = field(default_factory=dict)  # channel -> noise factor


def crosstalk_matrix(spec: BoardSpec) -> np.ndarray:
    """K[i, j]: the share of pad j's finger signal that pad i sees (1 on the diagonal)."""
    xy = np.array([[p.x_mm, p.y_mm] for p in spec.pads], dtype=float)
    dist = np.hypot(xy[:, None, 0] - xy[None, :, 0], xy[:, None, 1] - xy[None, :, 1])
    k = np.where(dist <= spec.noise.crosstalk_reach_mm, spec.noise.crosstalk, 0.0)
    np.fill_diagonal(k, 1.0)
    return k


class BoardModel:
    def __init__(self, spec: BoardSpec, seed: int, touches: TouchPlan, faults: UnitFaults | None = None):
        self.spec = spec
        self.seed = seed
        self.touches = touches
        self.faults = faults or UnitFaults()
        n = spec.channels
        self.parasitic_f = np.array([p.parasitic_f for p in spec.pads])
        self.pad_area_m2 = np.array([p.area_m2 for p in spec.pads])
        # Plate capacitance per square metre of skin over a pad, through overlay and air gap.
        self.plate_f_per_m2 = physics.EPSILON_0_F_PER_M / spec.overlay.effective_gap_m
        self.finger_m2 = physics.finger_area_m2(spec.finger.contact_diameter_m)
        self.crosstalk = crosstalk_matrix(spec)
        rng = np.random.default_rng([seed, 0xB0A4D])
        self.hum_gain = rng.uniform(0.7, 1.3, n)  # pads pick up hum unequally (trace length, routing)
        self.hum_phase = rng.uniform(0.0, 2 * math.pi, 2)
        self.temp_phase = float(rng.uniform(0.0, 2 * math.pi))
        self.drift_gain = rng.uniform(0.7, 1.3, n)
        self._chunks: dict[int, tuple[np.ndarray, np.ndarray, np.ndarray]] = {}

    # --- random parts, by chunk -------------------------------------------------------------------
    def _chunk(self, k: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        got = self._chunks.get(k)
        if got is None:
            rng = np.random.default_rng([self.seed, 0x5EED, k])
            shape = (CHUNK_FRAMES, self.spec.channels)
            got = (rng.standard_normal(shape), rng.random(shape), rng.standard_normal(shape))
            if len(self._chunks) > 4:
                self._chunks.pop(min(self._chunks))
            self._chunks[k] = got
        return got

    def _random_parts(self, first: int, n: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        k0, k1 = first // CHUNK_FRAMES, (first + n - 1) // CHUNK_FRAMES
        parts = [self._chunk(k) for k in range(k0, k1 + 1)]
        lo = first - k0 * CHUNK_FRAMES
        return tuple(np.concatenate([p[i] for p in parts])[lo:lo + n] for i in range(3))  # type: ignore

    # --- deterministic parts ----------------------------------------------------------------------
    def _contact_f(self, c: Contact, t_s: np.ndarray, touch: np.ndarray, water: np.ndarray,
                   presence: np.ndarray) -> None:
        env = c.envelope(t_s)[:, None] * c.shares(t_s)
        ch = list(c.channels)
        if c.kind == "water":
            wet = np.minimum(c.wet_area_m2 / len(ch), self.pad_area_m2[ch])
            plate = self.plate_f_per_m2 * wet
            film = plate * physics.WATER_FLOAT_F / (plate + physics.WATER_FLOAT_F)
            water[:, ch] += env * film
            return
        overlap = np.minimum(self.finger_m2 * c.strength * env, self.pad_area_m2[ch])
        plate = self.plate_f_per_m2 * overlap
        body = self.spec.finger.body_f if c.body_f is None else c.body_f
        touch[:, ch] += plate * body / (plate + body)
        presence[:, ch] += env

    def capacitance(self, first: int, n: int) -> tuple[np.ndarray, np.ndarray]:
        """Pad capacitance in farads (n, channels) before noise, and finger presence 0..1."""
        spec, noise = self.spec, self.spec.noise
        t_s = (first + np.arange(n)) / spec.rate_hz
        shape = (n, spec.channels)
        touch, water, presence = np.zeros(shape), np.zeros(shape), np.zeros(shape)
        for c in self.touches.overlapping(float(t_s[0]), float(t_s[-1])):
            self._contact_f(c, t_s, touch, water, presence)
        if noise.crosstalk:
            touch = touch @ self.crosstalk.T
        cap = self.parasitic_f + touch + water
        if noise.drift_pf_per_k and noise.temp_swing_k:
            temp_k = noise.temp_swing_k * np.sin(2 * math.pi * t_s / noise.temp_period_s + self.temp_phase)
            cap += (noise.drift_pf_per_k * 1e-12 * temp_k)[:, None] * self.drift_gain
        if noise.hum_pf or noise.hum_touch_pf:
            w = 2 * math.pi * noise.mains_hz * t_s
            wave = np.sin(w + self.hum_phase[0]) + noise.hum_harmonic2 * np.sin(2 * w + self.hum_phase[1])
            amp_pf = (noise.hum_pf + noise.hum_touch_pf * np.minimum(presence, 1.0)) * self.hum_gain
            cap += amp_pf * 1e-12 * wave[:, None]
        return cap, presence

    def readings(self, first: int, n: int) -> np.ndarray:
        """Integer readings (n, channels) of frames first .. first + n - 1."""
        cap, _ = self.capacitance(first, n)
        white, dither, post = self._random_parts(first, n)
        white_pf = np.full(self.spec.channels, self.spec.noise.white_pf)
        for ch, factor in self.faults.noisy_pads.items():
            white_pf[ch] *= factor
        cap = cap + white * (white_pf * 1e-12)
        for ch in self.faults.open_pads:
            cap[:, ch] = OPEN_PAD_F + white[:, ch] * white_pf[ch] * 1e-12
        for ch in self.faults.shorted_pads:
            cap[:, ch] = SHORTED_PAD_F
        np.maximum(cap, MIN_PAD_F, out=cap)  # noise never makes a capacitance negative
        counts = self.spec.method.counts(cap, dither)
        if self.spec.noise.counts_rms:
            counts = counts + np.rint(post * self.spec.noise.counts_rms).astype(np.int64)
            np.clip(counts, 0, self.spec.method.max_count, out=counts)
        return counts

    def idle_counts(self) -> np.ndarray:
        """Reading of each pad with nothing near and no noise (for estimates and tests)."""
        return np.asarray(self.spec.method.value(self.parasitic_f), dtype=float)
