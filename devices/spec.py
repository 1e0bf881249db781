"""What a simulated board is made of: pads, overlay, finger, method, noise, touch script (dataclasses).

`devices.boards.load_board` builds these from a TOML file; the simulator and the estimator read them.
All values are SI (metres, farads, seconds, hertz) whatever unit the file used.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from devices.materials import Material
from devices.methods import Method


@dataclass(frozen=True, slots=True)
class PadSpec:
    name: str
    area_m2: float
    parasitic_f: float
    x_mm: float
    y_mm: float


@dataclass(frozen=True, slots=True)
class SliderSpec:
    name: str
    pads: tuple[str, ...]


@dataclass(frozen=True, slots=True)
class OverlaySpec:
    material: Material
    thickness_m: float
    air_gap_m: float = 0.0

    @property
    def effective_gap_m(self) -> float:
        """Thickness of air that would give the same plate capacitance: sum of t / er."""
        return self.thickness_m / self.material.er_nominal + self.air_gap_m / 1.0006


@dataclass(frozen=True, slots=True)
class FingerSpec:
    contact_diameter_m: float
    body_f: float


@dataclass(frozen=True, slots=True)
class NoiseSpec:
    white_pf: float = 0.01  # rms capacitance noise on each reading
    counts_rms: float = 0.0  # rms noise added after conversion (reference, comparator jitter)
    mains_hz: float = 50.0
    hum_pf: float = 0.0  # hum amplitude with nobody near
    hum_touch_pf: float = 0.0  # extra hum amplitude while a finger is on the pad (the body is an antenna)
    hum_harmonic2: float = 0.0  # second harmonic (rectifier ripple) relative to the fundamental
    drift_pf_per_k: float = 0.0  # parasitic change per kelvin of board temperature
    temp_swing_k: float = 0.0  # amplitude of the slow temperature cycle
    temp_period_s: float = 600.0
    crosstalk: float = 0.0  # fraction of a touched pad's signal seen on pads within reach
    crosstalk_reach_mm: float = 0.0


@dataclass(frozen=True, slots=True)
class ScriptTouch:
    """One entry of a board's touch script, before looping is expanded."""

    kind: str  # "finger" on one pad, "swipe" along a slider, or "water" over some pads
    pads: tuple[str, ...]
    at_s: float
    hold_s: float
    strength: float = 1.0
    slider: str | None = None
    from_pos: float = 0.0
    to_pos: float = 0.0
    wet_area_m2: float = 0.0
    body_f: float | None = None  # who touches: None = the board's [finger] body_pf


MAX_RANDOM_PER_MIN = 600.0  # ten touches a second: more than any hand, enough for load tests
MIN_RANDOM_HOLD_S = 0.02  # about a frame at 50 Hz; a touch shorter than its own ramps is no touch


@dataclass(frozen=True, slots=True)
class RandomTouchSpec:
    per_min: float = 0.0
    hold_min_s: float = 0.2
    hold_max_s: float = 1.2
    strength_min: float = 0.6
    strength_max: float = 1.3
    pads: tuple[str, ...] = ()  # empty: every pad that is not part of a slider


@dataclass(frozen=True, slots=True)
class BoardSpec:
    name: str
    description: str
    fw: str
    rate_hz: float
    method: Method
    overlay: OverlaySpec
    finger: FingerSpec
    pads: tuple[PadSpec, ...]
    sliders: tuple[SliderSpec, ...] = ()
    noise: NoiseSpec = field(default_factory=NoiseSpec)
    script: tuple[ScriptTouch, ...] = ()
    loop_s: float = 0.0  # the script repeats every loop_s seconds (0: runs once)
    random: RandomTouchSpec = field(default_factory=RandomTouchSpec)
    source: str = ""

    @property
    def channels(self) -> int:
        return len(self.pads)

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(p.name for p in self.pads)

    def channel_index(self, name: str) -> int:
        return self.names.index(name)
