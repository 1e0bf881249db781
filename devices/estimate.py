"""The overlay estimator: will this pad work behind that overlay? Pure; no I/O.

From a pad, an overlay, a finger, a conversion method and the noise, it predicts the finger's added
capacitance, the count change and the SNR, each at the material's nominal permittivity and at both
ends of its range (`devices.materials`). SNR here is signal over the untouched rms noise (white, hum,
rounding); the trade's usual floor is 5 and 10 is comfortable (common practice, no source).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

from devices import physics
from devices.materials import Material
from devices.methods import Method

SNR_FLOOR = 5.0  # common practice, no source
SNR_GOOD = 10.0  # common practice, no source

# Components used when the designer names a method but not its parts (everyday units, like board files).
DEFAULT_COMPONENTS: dict[str, dict[str, float]] = {
    "charge_time": {"r_ohm": 2.2e6, "vdd_v": 3.3, "threshold_v": 1.65, "timer_mhz": 64, "timer_bits": 16},
    "charge_share": {"sample_pf": 20, "vdd_v": 3.3, "vref_v": 3.3, "adc_bits": 12},
    "oscillator": {"r1_ohm": 10e3, "r2_ohm": 47e3, "timing_pf": 10, "gate_ms": 10},
}


@dataclass(frozen=True, slots=True)
class EstimateInput:
    pad_area_m2: float
    parasitic_f: float
    material: Material
    thickness_m: float
    method: Method
    air_gap_m: float = 0.0
    finger_diameter_m: float = physics.FINGER_CONTACT_DIAMETER_M
    body_f: float = physics.BODY_STANDING_F
    noise_pf: float = 0.02  # rms capacitance noise at the pad
    noise_counts: float = 0.0  # rms noise after conversion
    hum_pf: float = 0.0  # mains hum amplitude at the pad (a sine: rms is amplitude / sqrt 2)


@dataclass(frozen=True, slots=True)
class Spread:
    nominal: float
    low: float  # at the low end of the material's permittivity
    high: float  # at the high end


@dataclass(frozen=True, slots=True)
class Estimate:
    finger_pf: Spread
    delta_counts: Spread  # signed: the direction a touch moves the reading
    snr: Spread
    idle_counts: float
    noise_counts_rms: float
    counts_per_pf: float
    polarity: int
    verdict: str
    notes: list[str] = field(default_factory=list)
    inputs: dict[str, object] = field(default_factory=dict)

    def as_dict(self) -> dict[str, object]:
        return asdict(self)


def _finger_f(inp: EstimateInput, er: float) -> float:
    return physics.finger_coupling_f(inp.pad_area_m2, inp.thickness_m, er,
                                     physics.finger_area_m2(inp.finger_diameter_m), inp.body_f, inp.air_gap_m)


def _delta_counts(method: Method, base_f: float, added_f: float) -> float:
    return float(method.value(base_f + added_f)) - float(method.value(base_f))


def estimate(inp: EstimateInput) -> Estimate:
    m = inp.method
    base = inp.parasitic_f
    ers = (inp.material.er_nominal, inp.material.er_low, inp.material.er_high)
    fingers = [_finger_f(inp, er) for er in ers]
    deltas = [_delta_counts(m, base, c) for c in fingers]
    step = 1e-15
    slope = abs(float(m.value(base + step)) - float(m.value(base - step))) / (2 * step)  # counts per farad
    quantisation = 1.0 / math.sqrt(12.0)  # uniform rounding error of an integer reading, rms
    noise_pf = math.hypot(inp.noise_pf, inp.hum_pf / math.sqrt(2.0))
    noise = math.sqrt((slope * noise_pf * 1e-12) ** 2 + inp.noise_counts**2 + quantisation**2)
    snrs = [abs(d) / noise for d in deltas]
    idle = float(m.value(base))
    notes = []
    if idle >= m.max_count or idle < 1:
        notes.append(f"the idle reading {idle:.0f} is outside the method's range 0..{m.max_count}: "
                     "change the components")
    elif idle + max(deltas, key=abs) > m.max_count:
        notes.append("a touch would push the reading past the top of the counter")
    if max(abs(d) for d in deltas) < 2:
        notes.append("the count change is below 2 counts: the method cannot resolve this finger")
    worst = min(snrs)
    if worst >= SNR_GOOD:
        verdict = "works: SNR at least 10 across the material's range"
    elif worst >= SNR_FLOOR:
        verdict = "marginal: SNR between 5 and 10 somewhere in the material's range"
    elif max(snrs) >= SNR_FLOOR:
        verdict = "risky: SNR falls below 5 at one end of the material's range"
    else:
        verdict = "will not work: SNR below 5 (thinner overlay, larger pad, or less noise)"
    inputs = {
        "pad_area_mm2": inp.pad_area_m2 * 1e6, "parasitic_pf": inp.parasitic_f * 1e12,
        "material": inp.material.key, "er": list(ers), "er_source": inp.material.source,
        "thickness_mm": inp.thickness_m * 1e3, "air_gap_mm": inp.air_gap_m * 1e3,
        "finger_diameter_mm": inp.finger_diameter_m * 1e3, "body_pf": inp.body_f * 1e12,
        "method": m.kind, "method_detail": m.describe(), "noise_pf": inp.noise_pf,
        "noise_counts": inp.noise_counts, "hum_pf": inp.hum_pf,
    }
    return Estimate(Spread(*(c * 1e12 for c in fingers)), Spread(*deltas), Spread(*snrs), idle, noise,
                    slope * 1e-12, m.polarity, verdict, notes, inputs)
