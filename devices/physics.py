"""The physics of a capacitive pad: plates, layers, fingers, water. Pure functions, SI units.

Model (self-capacitance sensing): the pad has a parasitic capacitance to the board's ground. A finger
adds a parallel-plate capacitance through the overlay (pad = one plate, skin = the other), in series
with the body's own capacitance to ground (hundreds of pF standing on a floor, much less when the
person is isolated, e.g. on a ladder or wearing thick soles). A water film couples like a finger but
has no ground path of its own: only its small capacitance to the surroundings, so it adds much less.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

# CODATA 2022: 8.8541878188(14)e-12 F/m (CODATA 2018 gave 8.8541878128(13)e-12; they differ by 7e-10 rel).
EPSILON_0_F_PER_M = 8.8541878188e-12

BODY_STANDING_F = 200e-12  # person standing on a floor: 100..300 pF (common practice, no source)
BODY_ISOLATED_F = 50e-12  # insulated from ground: a few tens of pF (common practice, no source)
FINGER_CONTACT_DIAMETER_M = 10e-3  # a pressed fingertip is about 8..12 mm across (common practice, no source)
WATER_FLOAT_F = 1e-12  # a loose water film's own capacitance to its surroundings (assumption, no source)


def parallel_plate_f(area_m2: float, gap_m: float, er: float = 1.0) -> float:
    """C = e0 * er * A / d (fringing ignored: fine while the gap is small next to the plate)."""
    if area_m2 < 0 or gap_m <= 0 or er <= 0:
        raise ValueError("parallel plate needs area >= 0, gap > 0 and er > 0")
    return EPSILON_0_F_PER_M * er * area_m2 / gap_m


def layered_plate_f(area_m2: float, layers: Sequence[tuple[float, float]]) -> float:
    """Plates with stacked dielectrics [(thickness_m, er), ...]: the layers act as capacitors in series."""
    thick = [(t, er) for t, er in layers if t > 0]
    if not thick:
        raise ValueError("a layered plate needs at least one layer thicker than zero")
    effective_m = sum(t / er for t, er in thick)
    return EPSILON_0_F_PER_M * area_m2 / effective_m


def series_f(*capacitances_f: float) -> float:
    """Capacitors in series: 1/C = sum(1/Ci). A zero capacitance in the chain gives zero."""
    if any(c <= 0 for c in capacitances_f):
        return 0.0
    return 1.0 / sum(1.0 / c for c in capacitances_f)


def pad_area_m2(shape: str, width_m: float = 0.0, height_m: float = 0.0, diameter_m: float = 0.0,
                inner_diameter_m: float = 0.0) -> float:
    """Area of a pad: `rect` (width x height), `circle` (diameter), `ring` (diameter minus inner hole)."""
    if shape == "rect":
        return width_m * height_m
    if shape == "circle":
        return math.pi * diameter_m**2 / 4.0
    if shape == "ring":
        return math.pi * (diameter_m**2 - inner_diameter_m**2) / 4.0
    raise ValueError(f"unknown pad shape {shape!r}: use rect, circle or ring")


def finger_area_m2(diameter_m: float = FINGER_CONTACT_DIAMETER_M) -> float:
    return math.pi * diameter_m**2 / 4.0


def finger_coupling_f(pad_area_m2: float, overlay_thickness_m: float, overlay_er: float,
                      finger_contact_m2: float | None = None, body_f: float = BODY_STANDING_F,
                      air_gap_m: float = 0.0, air_er: float = 1.0006) -> float:
    """Capacitance a finger adds to a pad: plate through overlay (+ air gap) in series with the body.

    The plate area is the smaller of the pad and the fingertip contact (a finger larger than the pad
    adds nothing over the pad's edge in this model).
    """
    contact = finger_area_m2() if finger_contact_m2 is None else finger_contact_m2
    overlap = min(pad_area_m2, contact)
    if overlap <= 0:
        return 0.0
    plate = layered_plate_f(overlap, [(overlay_thickness_m, overlay_er), (air_gap_m, air_er)])
    return series_f(plate, body_f)


def water_film_f(wet_area_m2: float, overlay_thickness_m: float, overlay_er: float,
                 float_f: float = WATER_FLOAT_F) -> float:
    """A water film over a pad: the same plate as a finger, but in series with only the film's float."""
    if wet_area_m2 <= 0:
        return 0.0
    return series_f(parallel_plate_f(wet_area_m2, overlay_thickness_m, overlay_er), float_f)


def pad_parasitic_f(pad_area_m2: float, pcb_thickness_m: float = 1.6e-3, pcb_er: float = 4.5,
                    ground_fill: float = 0.25, trace_f: float = 3e-12) -> float:
    """Rough parasitic of a pad over a hatched ground plane on the far side of the board, plus its trace.

    `ground_fill` is the copper fraction of the hatch under the pad (hatching keeps parasitics low).
    """
    if not 0.0 <= ground_fill <= 1.0:
        raise ValueError("ground_fill is a fraction between 0 and 1")
    return parallel_plate_f(pad_area_m2 * ground_fill, pcb_thickness_m, pcb_er) + trace_f
