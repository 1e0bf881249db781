"""The overlay estimator: will this pad work behind that overlay? Pure; no I/O.

From a pad, an overlay, a finger, a conversion method and the noise, it predicts the finger's added
capacitance, the count change and the SNR, each at the material's nominal permittivity and at both
ends of its range (`devices.materials`). SNR comes in the two forms padtune measures live: signal over
noise peak-to-peak (`snr_pp`, the one verdicts use everywhere in padtune: below 5 weak, 5-10 marginal,
above 10 solid; common practice, no source) and signal over noise rms (`snr_rms`). Noise is the
untouched noise: white (pp taken as 6 x rms, what a few hundred samples of Gaussian noise span; common
practice, no source), hum (a sine: pp is twice its amplitude) and the reading's quantisation
(`quantisation_rms` of the method: a counter's random gate phase or an ADC's rounding).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

from devices import physics
from devices.materials import Material
from devices.methods import Method

# The same bounds as processing.measure's verdict (devices may not import processing).
SNR_PP_WEAK_BELOW = 5.0  # common practice, no source
SNR_PP_SOLID_ABOVE = 10.0  # common practice, no source
# Overlay + gap past this share of the fingertip's width: fringing matters (rule of thumb, no source).
THICK_OVERLAY_RATIO = 0.3
PP_PER_RMS = 6.0  # peak-to-peak of Gaussian noise over a few hundred samples (common practice, no source)

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
    snr_pp: Spread
    snr_rms: Spread
    idle_counts: float
    noise_counts_rms: float
    noise_counts_pp: float
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


def _slope_counts_per_f(method: Method, base_f: float) -> float:
    step_f = 1e-15
    return abs(float(method.value(base_f + step_f)) - float(method.value(base_f - step_f))) / (2 * step_f)


def _noise_counts(inp: EstimateInput, counts_per_f: float) -> tuple[float, float]:
    """Untouched noise in counts, (rms, pp): white and conversion noise and rounding, plus hum as a sine."""
    random_rms = math.sqrt((counts_per_f * inp.noise_pf * 1e-12) ** 2 + inp.noise_counts**2
                           + inp.method.quantisation_rms**2)
    hum_amplitude = counts_per_f * inp.hum_pf * 1e-12
    rms = math.sqrt(random_rms**2 + hum_amplitude**2 / 2.0)
    pp = max(1.0, PP_PER_RMS * random_rms + 2.0 * hum_amplitude)  # integer readings: at least 1
    return rms, pp


def _idle_in_range(method: Method, idle: float) -> bool:
    return 1 <= idle < method.max_count


def _notes(inp: EstimateInput, idle: float, deltas: list[float]) -> list[str]:
    method = inp.method
    notes = []
    if inp.thickness_m + inp.air_gap_m > THICK_OVERLAY_RATIO * inp.finger_diameter_m:
        # The parallel-plate model holds while the gap is small next to the plates (any electrostatics
        # text); past that, field lines fringing around the fingertip add signal the model leaves out.
        notes.append("the overlay is thick next to the fingertip: fringing (left out here) adds some signal, "
                     "so the real count change may be larger than this")
    if not _idle_in_range(method, idle):
        notes.append(f"the idle reading {idle:.0f} is outside the method's range 0..{method.max_count}: "
                     "change the components")
    elif idle + max(deltas, key=abs) > method.max_count:
        notes.append("a touch would push the reading past the top of the counter")
    if max(abs(d) for d in deltas) < 2:
        notes.append("the count change is below 2 counts: the method cannot resolve this finger")
    return notes


def _verdict(method: Method, idle: float, snr_pp: list[float]) -> str:
    if not _idle_in_range(method, idle):
        return "unusable: the idle reading is outside the method's range (change the components)"
    worst, best = min(snr_pp), max(snr_pp)
    if worst > SNR_PP_SOLID_ABOVE:
        return "solid: SNR (pp) above 10 across the material's range"
    if worst >= SNR_PP_WEAK_BELOW:
        return "marginal: SNR (pp) between 5 and 10 somewhere in the material's range"
    if best >= SNR_PP_WEAK_BELOW:
        return "weak at one end: SNR (pp) falls below 5 within the material's range"
    return "weak: SNR (pp) below 5 (try a thinner overlay, a larger pad, or less noise)"


def _inputs(inp: EstimateInput, ers: tuple[float, float, float]) -> dict[str, object]:
    """The inputs in everyday units, as the report and --json show them."""
    return {
        "pad_area_mm2": inp.pad_area_m2 * 1e6, "parasitic_pf": inp.parasitic_f * 1e12,
        "material": inp.material.key, "er": list(ers), "er_source": inp.material.source,
        "thickness_mm": inp.thickness_m * 1e3, "air_gap_mm": inp.air_gap_m * 1e3,
        "finger_diameter_mm": inp.finger_diameter_m * 1e3, "body_pf": inp.body_f * 1e12,
        "method": inp.method.kind, "method_detail": inp.method.describe(), "noise_pf": inp.noise_pf,
        "noise_counts": inp.noise_counts, "hum_pf": inp.hum_pf,
    }


def estimate(inp: EstimateInput) -> Estimate:
    m, base_f = inp.method, inp.parasitic_f  # the untouched pad
    ers = (inp.material.er_nominal, inp.material.er_low, inp.material.er_high)
    fingers = [_finger_f(inp, er) for er in ers]
    deltas = [_delta_counts(m, base_f, c) for c in fingers]
    counts_per_f = _slope_counts_per_f(m, base_f)
    noise_rms, noise_pp = _noise_counts(inp, counts_per_f)
    snr_pp = [abs(d) / noise_pp for d in deltas]
    snr_rms = [abs(d) / noise_rms for d in deltas]
    idle = float(m.value(base_f))
    return Estimate(Spread(*(c * 1e12 for c in fingers)), Spread(*deltas), Spread(*snr_pp), Spread(*snr_rms),
                    idle, noise_rms, noise_pp, counts_per_f * 1e-12, m.polarity, _verdict(m, idle, snr_pp),
                    _notes(inp, idle, deltas), _inputs(inp, ers))
