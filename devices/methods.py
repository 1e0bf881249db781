"""Three ways a board turns a pad's capacitance into an integer reading. Pure, vectorised with numpy.

1. `RCOscillator`: an RC astable (555 style) whose cycles are counted over a gate time. More capacitance
   means a lower frequency: a touch lowers the count (polarity -1).
2. `ChargeShare`: an internal sample capacitor charged to Vdd is connected to the discharged pad and the
   shared voltage is read by an ADC. More pad capacitance means a lower voltage: a touch lowers it (-1).
3. `ChargeTime`: the pad is charged through a resistor and a timer counts until a threshold. More
   capacitance means a longer time: a touch raises the count (+1).

Each has `value(c_f)` (the ideal reading as a float, for the estimator) and `counts(c_f, dither)` (the
integer the board would send; `dither` in [0, 1) stands for the unknown phase of a counter's gate).
`quantisation_rms` is the rms error the integer adds to the ideal value: a counter read with a random
gate phase, floor(x + U) with U uniform on [0, 1), errs with variance f (1 - f) for the fraction f of x,
1/6 on average over f; an ADC that rounds errs uniformly over one code, variance 1/12.
"""

from __future__ import annotations

import dataclasses
import difflib
import math
from dataclasses import dataclass
from typing import ClassVar

import numpy as np

from protocol.errors import UserError

LN2 = math.log(2.0)
COUNTER_QUANTISATION_RMS = math.sqrt(1.0 / 6.0)  # floor(x + U), random phase U, mean over the fraction of x
ROUNDING_QUANTISATION_RMS = math.sqrt(1.0 / 12.0)  # rounding to the nearest code


def astable_frequency_hz(r1_ohm: float, r2_ohm: float, c_f: float) -> float:
    """555 astable: f = 1 / (ln 2 * (R1 + 2 R2) * C)."""
    return 1.0 / (LN2 * (r1_ohm + 2.0 * r2_ohm) * c_f)


def astable_duty(r1_ohm: float, r2_ohm: float) -> float:
    """Fraction of the period the output is high: (R1 + R2) / (R1 + 2 R2)."""
    return (r1_ohm + r2_ohm) / (r1_ohm + 2.0 * r2_ohm)


def shared_voltage_v(c1_f: float, v1_v: float, c2_f: float, v2_v: float = 0.0) -> float:
    """Two capacitors connected together: total charge is kept, V = (C1 V1 + C2 V2) / (C1 + C2)."""
    return (c1_f * v1_v + c2_f * v2_v) / (c1_f + c2_f)


def charge_time_s(r_ohm: float, c_f: float, vdd_v: float, threshold_v: float) -> float:
    """Time for an RC charging from 0 V toward Vdd to reach the threshold: R C ln(Vdd / (Vdd - Vth))."""
    if not 0.0 < threshold_v < vdd_v:
        raise ValueError("the threshold must lie between 0 V and the supply")
    return r_ohm * c_f * math.log(vdd_v / (vdd_v - threshold_v))


def _as_counts(x: np.ndarray, max_count: int) -> np.ndarray:
    return np.clip(np.floor(x), 0, max_count).astype(np.int64)


@dataclass(frozen=True, slots=True)
class RCOscillator:
    r1_ohm: float
    r2_ohm: float
    timing_f: float  # the fixed timing capacitor; the pad is in parallel with it
    gate_s: float
    counter_bits: int = 24
    kind: ClassVar[str] = "oscillator"
    polarity: ClassVar[int] = -1
    quantisation_rms: ClassVar[float] = COUNTER_QUANTISATION_RMS

    @property
    def max_count(self) -> int:
        return (1 << self.counter_bits) - 1

    def value(self, c_f: np.ndarray | float) -> np.ndarray | float:
        return self.gate_s / (LN2 * (self.r1_ohm + 2.0 * self.r2_ohm) * (self.timing_f + c_f))

    def counts(self, c_f: np.ndarray, dither: np.ndarray | float = 0.5) -> np.ndarray:
        return _as_counts(np.asarray(self.value(np.asarray(c_f))) + dither, self.max_count)

    def describe(self) -> str:
        return (f"RC oscillator R1={self.r1_ohm:g} ohm R2={self.r2_ohm:g} ohm "
                f"C={self.timing_f * 1e12:g} pF gate={self.gate_s * 1e3:g} ms")


@dataclass(frozen=True, slots=True)
class ChargeShare:
    sample_f: float
    vdd_v: float = 3.3
    vref_v: float = 3.3
    adc_bits: int = 12
    kind: ClassVar[str] = "charge_share"
    polarity: ClassVar[int] = -1
    quantisation_rms: ClassVar[float] = ROUNDING_QUANTISATION_RMS

    @property
    def max_count(self) -> int:
        return (1 << self.adc_bits) - 1

    def value(self, c_f: np.ndarray | float) -> np.ndarray | float:
        volts = self.vdd_v * self.sample_f / (self.sample_f + c_f)
        return volts / self.vref_v * (1 << self.adc_bits)

    def counts(self, c_f: np.ndarray, dither: np.ndarray | float = 0.5) -> np.ndarray:
        # An ADC rounds; the board's noise (added to c_f) is what spreads the codes, not the gate phase.
        return _as_counts(np.asarray(self.value(np.asarray(c_f))) + 0.5, self.max_count)

    def describe(self) -> str:
        return (f"charge sharing Cs={self.sample_f * 1e12:g} pF Vdd={self.vdd_v:g} V "
                f"{self.adc_bits}-bit ADC (Vref {self.vref_v:g} V)")


@dataclass(frozen=True, slots=True)
class ChargeTime:
    r_ohm: float
    vdd_v: float
    threshold_v: float
    timer_hz: float
    timer_bits: int = 16
    kind: ClassVar[str] = "charge_time"
    polarity: ClassVar[int] = 1
    quantisation_rms: ClassVar[float] = COUNTER_QUANTISATION_RMS

    @property
    def max_count(self) -> int:
        return (1 << self.timer_bits) - 1  # the timer overflows: a shorted pad reads as this timeout

    def value(self, c_f: np.ndarray | float) -> np.ndarray | float:
        log_term = math.log(self.vdd_v / (self.vdd_v - self.threshold_v))
        return self.r_ohm * c_f * log_term * self.timer_hz

    def counts(self, c_f: np.ndarray, dither: np.ndarray | float = 0.5) -> np.ndarray:
        return _as_counts(np.asarray(self.value(np.asarray(c_f))) + dither, self.max_count)

    def describe(self) -> str:
        return (f"charge time R={self.r_ohm:g} ohm Vdd={self.vdd_v:g} V Vth={self.threshold_v:g} V "
                f"timer {self.timer_hz / 1e6:g} MHz")


Method = RCOscillator | ChargeShare | ChargeTime
METHOD_KINDS: dict[str, type] = {"oscillator": RCOscillator, "charge_share": ChargeShare,
                                 "charge_time": ChargeTime}


# Board files and the command line give components in everyday units; the key says the unit.
# file key -> (constructor argument, factor to SI)
FILE_KEYS: dict[str, dict[str, tuple[str, float]]] = {
    "oscillator": {"r1_ohm": ("r1_ohm", 1.0), "r2_ohm": ("r2_ohm", 1.0), "timing_pf": ("timing_f", 1e-12),
                   "gate_ms": ("gate_s", 1e-3), "counter_bits": ("counter_bits", 1)},
    "charge_share": {"sample_pf": ("sample_f", 1e-12), "vdd_v": ("vdd_v", 1.0), "vref_v": ("vref_v", 1.0),
                     "adc_bits": ("adc_bits", 1)},
    "charge_time": {"r_ohm": ("r_ohm", 1.0), "vdd_v": ("vdd_v", 1.0), "threshold_v": ("threshold_v", 1.0),
                    "timer_mhz": ("timer_hz", 1e6), "timer_bits": ("timer_bits", 1)},
}
_INT_ARGS = {"counter_bits", "adc_bits", "timer_bits"}
# Plausible ranges of each component in file units: wide enough for any board, narrow enough that a
# typo (1e160 ohm) is refused instead of overflowing the arithmetic.
FILE_RANGES: dict[str, tuple[float, float]] = {
    "r1_ohm": (1.0, 1e9), "r2_ohm": (1.0, 1e9), "r_ohm": (1.0, 1e9), "timing_pf": (0.1, 1e7),
    "gate_ms": (0.001, 1e4), "sample_pf": (0.1, 1e6), "vdd_v": (0.1, 60.0), "vref_v": (0.1, 60.0),
    "threshold_v": (0.01, 60.0), "timer_mhz": (0.001, 1e4),
    "counter_bits": (4, 32), "adc_bits": (4, 32), "timer_bits": (4, 32),
}


def _component(raw: object, where: str, key: str, factor: float, whole: bool) -> float | int:
    """One component from file units to SI, or a one-line UserError saying what range it must be in."""
    # Compared, not math.isfinite: an integer of hundreds of digits overflows a float (OverflowError).
    if isinstance(raw, bool) or not isinstance(raw, int | float) or not 0 < raw < 1e300:
        raise UserError(f"{where}: must be a positive number, got {raw!r}")
    low, high = FILE_RANGES[key]
    if whole:
        if int(raw) != raw or not low <= raw <= high:
            raise UserError(f"{where}: must be a whole number of bits from {low:g} to {high:g}, got {raw!r}")
        return int(raw)
    if not low <= raw <= high:
        raise UserError(f"{where}: must be from {low:g} to {high:g}, got {raw!r}")
    return float(raw) * factor


def method_from_table(kind: str, table: dict[str, object], where: str = "method") -> Method:
    """Build a method from everyday-unit keys (`r1_ohm`, `timing_pf`, ...); one-line UserError if wrong."""
    if kind not in FILE_KEYS:
        raise UserError(f"{where}.kind: unknown method {kind!r}; use one of {', '.join(FILE_KEYS)}")
    keys = FILE_KEYS[kind]
    kwargs: dict[str, float | int] = {}
    for key, raw in table.items():
        if key not in keys:
            close = difflib.get_close_matches(key, list(keys), n=1)
            hint = f" (did you mean {close[0]}?)" if close else ""
            raise UserError(f"{where}.{key}: not a {kind} setting{hint}; known: {', '.join(keys)}")
        arg, factor = keys[key]
        kwargs[arg] = _component(raw, f"{where}.{key}", key, factor, arg in _INT_ARGS)
    cls = METHOD_KINDS[kind]
    required = {f.name for f in dataclasses.fields(cls) if f.default is dataclasses.MISSING}
    missing = [k for k, (arg, _) in keys.items() if arg in required and arg not in kwargs]
    if missing:
        raise UserError(f"{where}: the {kind} method needs {', '.join(missing)}")
    if kind == "charge_time" and kwargs["threshold_v"] >= kwargs["vdd_v"]:
        raise UserError(f"{where}.threshold_v: must be below vdd_v ({kwargs['vdd_v']:g} V)")
    return cls(**kwargs)
