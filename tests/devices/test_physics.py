"""Physics of pads, overlays and fingers, checked against outside references named beside each test."""

import math

import pytest
import scipy.constants

from devices import physics
from devices.materials import MATERIALS, get_material
from protocol.errors import UserError


def test_epsilon_0_matches_scipy_codata():
    # scipy.constants carries CODATA 2022 (8.8541878188e-12); CODATA 2018 differs by 7e-10 relative.
    ours = physics.EPSILON_0_F_PER_M
    assert ours == pytest.approx(scipy.constants.epsilon_0, rel=1e-9)


def test_parallel_plate_worked_example_2cm2_at_2mm_in_air():
    # Textbook worked example (parallel-plate capacitor, air): A = 2.0 cm^2, d = 2.0 mm -> 0.885 pF.
    c_f = physics.parallel_plate_f(2.0e-4, 2.0e-3, er=1.0)
    assert c_f == pytest.approx(0.885e-12, abs=0.0005e-12)


def test_parallel_plate_formula_against_scipy_constant():
    # C = e0 er A / d, with e0 from scipy.constants (CODATA) rather than our own constant.
    c_f = physics.parallel_plate_f(1e-4, 1e-3, er=4.5)
    assert c_f == pytest.approx(scipy.constants.epsilon_0 * 4.5 * 1e-4 / 1e-3, rel=1e-9)


def test_layered_plate_is_layers_in_series():
    # Capacitors in series (any circuits textbook): stacking dielectrics = series plates of one area.
    a = 1e-4
    layers = [(3e-3, 3.0), (0.5e-3, 1.0)]
    plastic, air = physics.parallel_plate_f(a, 3e-3, 3.0), physics.parallel_plate_f(a, 0.5e-3, 1.0)
    expected = physics.series_f(plastic, air)
    assert physics.layered_plate_f(a, layers) == pytest.approx(expected, rel=1e-12)


def test_series_of_two_equal_capacitors_halves():
    # Series rule 1/C = 1/C1 + 1/C2 (textbook): two equal capacitors give half.
    assert physics.series_f(10e-12, 10e-12) == pytest.approx(5e-12)
    assert physics.series_f(10e-12, 0.0) == 0.0


def test_pad_areas():
    # Plane geometry: rectangle w*h, circle pi d^2 / 4, ring the difference of two circles.
    assert physics.pad_area_m2("rect", 0.012, 0.010) == pytest.approx(1.2e-4)
    assert physics.pad_area_m2("circle", diameter_m=0.02) == pytest.approx(math.pi * 1e-4)
    assert physics.pad_area_m2("ring", diameter_m=0.02, inner_diameter_m=0.01) == pytest.approx(
        math.pi * (4e-4 - 1e-4) / 4)
    with pytest.raises(ValueError):
        physics.pad_area_m2("hexagon")


def test_finger_is_plate_in_series_with_body():
    # Human-body model (common practice, no source): finger plate through the overlay in series with
    # the body's capacitance to ground; an isolated person (small body C) gives a smaller signal.
    area = physics.finger_area_m2(10e-3)
    plate = physics.parallel_plate_f(area, 3e-3, 3.0)
    standing = physics.finger_coupling_f(2e-4, 3e-3, 3.0, area, physics.BODY_STANDING_F)
    isolated = physics.finger_coupling_f(2e-4, 3e-3, 3.0, area, 5e-12)
    assert standing == pytest.approx(plate * 200e-12 / (plate + 200e-12))
    assert isolated < standing < plate


def test_finger_coupling_limited_by_the_smaller_of_pad_and_fingertip():
    small_pad = physics.finger_coupling_f(20e-6, 2e-3, 3.0, 80e-6)
    assert small_pad == pytest.approx(physics.finger_coupling_f(20e-6, 2e-3, 3.0, 20e-6))


def test_finger_signal_is_a_few_tenths_of_a_pf_behind_3mm_plastic():
    # Trade fact (common practice, no source): a fingertip through a few mm of plastic adds well under
    # 1 pF to a pad, up to about 15 pF when touching bare metal pads closely.
    c = physics.finger_coupling_f(1.44e-4, 3e-3, 3.0)
    assert 0.3e-12 < c < 1.5e-12


def test_higher_permittivity_overlay_of_same_thickness_gives_larger_signal():
    # Common practice, no source: glass (er ~7) beats acrylic (er ~3) at the same thickness.
    glass = physics.finger_coupling_f(1.44e-4, 3e-3, get_material("soda-lime-glass").er_nominal)
    acrylic = physics.finger_coupling_f(1.44e-4, 3e-3, get_material("acrylic").er_nominal)
    assert glass > 2 * acrylic


def test_water_film_adds_less_than_a_finger():
    # Common practice, no source: a film without a ground path only adds its plate in series with its
    # small capacitance to the surroundings.
    area = 1e-4
    assert physics.water_film_f(area, 3e-3, 3.0) < physics.finger_coupling_f(area, 3e-3, 3.0, area)


def test_material_table_rows_carry_source_and_range():
    required = {"air", "acrylic", "polycarbonate", "abs", "pet", "soda-lime-glass", "borosilicate-glass",
                "fr4", "dry-wood", "silicone"}
    assert required <= set(MATERIALS)
    for m in MATERIALS.values():
        assert m.er_low <= m.er_nominal <= m.er_high
        assert m.source and "memory" in m.source  # honest about where the number came from
    # Handbook value for air at 1 atm is 1.00059 (CRC Handbook, from memory).
    assert MATERIALS["air"].er_nominal == pytest.approx(1.00059, abs=1e-4)


def test_unknown_material_is_one_line_user_error_with_suggestion():
    with pytest.raises(UserError) as err:
        get_material("polycarbonat")
    assert "did you mean polycarbonate" in str(err.value) and "\n" not in str(err.value)
    assert get_material("PMMA").key == "acrylic"
