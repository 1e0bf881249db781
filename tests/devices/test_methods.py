"""The three conversion methods against textbook worked examples and scipy."""

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from devices import methods
from devices.methods import ChargeShare, ChargeTime, RCOscillator, method_from_table
from protocol.errors import UserError


def test_555_worked_example_ln2_form_and_144_rule():
    # 555 astable textbook example: R1 = 2.2 kOhm, R2 = 4.7 kOhm, C = 22 nF.
    # 1.44 rule f = 1.44 / ((R1 + 2 R2) C) gives about 5.64 kHz; the ln 2 form gives 5.65 kHz.
    f = methods.astable_frequency_hz(2.2e3, 4.7e3, 22e-9)
    assert f == pytest.approx(5650, abs=5)
    rule = 1.44 / ((2.2e3 + 2 * 4.7e3) * 22e-9)
    assert rule == pytest.approx(5640, abs=5)
    assert abs(f - rule) / f < 0.002  # 1.44 is 1 / ln 2 rounded


def test_555_duty_cycle():
    # Textbook: high for ln2 (R1 + R2) C, low for ln2 R2 C -> duty (R1 + R2) / (R1 + 2 R2).
    assert methods.astable_duty(2.2e3, 4.7e3) == pytest.approx(6.9 / 11.6)
    high = math.log(2) * (2.2e3 + 4.7e3) * 22e-9
    low = math.log(2) * 4.7e3 * 22e-9
    assert methods.astable_duty(2.2e3, 4.7e3) == pytest.approx(high / (high + low))


def test_oscillator_counts_over_gate_and_touch_lowers():
    osc = RCOscillator(2.2e3, 4.7e3, 22e-9, gate_s=1.0)
    assert osc.value(0.0) == pytest.approx(methods.astable_frequency_hz(2.2e3, 4.7e3, 22e-9))
    assert int(osc.counts(np.array([0.0]), 0.0)[0]) == math.floor(osc.value(0.0))
    assert osc.polarity == -1
    assert osc.value(1e-9) < osc.value(0.0)


def test_small_timing_capacitor_makes_finger_change_frequency_radically():
    # Trade fact (common practice, no source): with a timing capacitor of about 10 pF, a finger's added
    # capacitance of up to about 15 pF changes the frequency radically; a 10 nF capacitor hides it.
    small = RCOscillator(10e3, 47e3, 10e-12, 0.01)
    big = RCOscillator(10e3, 47e3, 10e-9, 0.01)
    change_small = 1 - small.value(15e-12) / small.value(0.0)
    change_big = 1 - big.value(15e-12) / big.value(0.0)
    assert change_small == pytest.approx(0.6)  # 10 / (10 + 15): the frequency falls to 40 %
    assert change_big < 0.002


def test_charge_sharing_conservation_worked_example():
    # Charge conservation (textbook): 4 uF at 100 V connected to an empty 6 uF ends at 40 V.
    assert methods.shared_voltage_v(4e-6, 100.0, 6e-6) == pytest.approx(40.0)
    q_before = 4e-6 * 100.0
    v = methods.shared_voltage_v(4e-6, 100.0, 6e-6)
    assert (4e-6 + 6e-6) * v == pytest.approx(q_before)


def test_charge_share_adc_reading():
    cs = ChargeShare(sample_f=20e-12, vdd_v=3.3, vref_v=3.3, adc_bits=12)
    v = methods.shared_voltage_v(20e-12, 3.3, 12e-12)
    assert int(cs.counts(np.array([12e-12]))[0]) == round(v / 3.3 * 4096)
    assert cs.polarity == -1 and cs.value(13e-12) < cs.value(12e-12)
    assert int(cs.counts(np.array([0.0]))[0]) == 4095  # the ADC clips at full scale


def test_rc_charge_time_worked_example():
    # Worked example (RC charging): 20 kOhm, 100 uF, 40 V source, 18 V threshold -> about 1.2 s.
    t = methods.charge_time_s(20e3, 100e-6, 40.0, 18.0)
    assert t == pytest.approx(1.2, abs=0.01)


def test_rc_charge_time_against_solve_ivp():
    # scipy.integrate.solve_ivp of dV/dt = (Vdd - V) / (R C), with an event at the threshold.
    r, c, vdd, vth = 1e6, 15e-12, 3.3, 1.65

    def crossing(_t, v):
        return v[0] - vth

    crossing.terminal = True
    sol = solve_ivp(lambda _t, v: [(vdd - v[0]) / (r * c)], (0, 1e-3), [0.0], events=crossing,
                    rtol=1e-10, atol=1e-12)
    assert methods.charge_time_s(r, c, vdd, vth) == pytest.approx(sol.t_events[0][0], rel=1e-6)


def test_charge_time_counts_and_touch_raises():
    ct = ChargeTime(r_ohm=1e6, vdd_v=3.3, threshold_v=1.65, timer_hz=48e6)
    assert ct.value(15e-12) == pytest.approx(methods.charge_time_s(1e6, 15e-12, 3.3, 1.65) * 48e6)
    assert ct.polarity == 1 and ct.value(16e-12) > ct.value(15e-12)
    assert int(ct.counts(np.array([1e-6]))[0]) == 65535  # a shorted pad times out at the timer's top


def test_threshold_above_supply_is_rejected():
    with pytest.raises(ValueError):
        methods.charge_time_s(1e3, 1e-9, 3.3, 3.3)


def test_method_from_table_converts_units_and_reports_mistakes():
    m = method_from_table("oscillator", {"r1_ohm": 2200, "r2_ohm": 4700, "timing_pf": 22000, "gate_ms": 100})
    assert m.timing_f == pytest.approx(22e-9) and m.gate_s == pytest.approx(0.1)
    for kind, table, words in [
        ("charge_time", {"r_ohm": 1e6, "vdd_v": 3.3, "treshold_v": 1, "timer_mhz": 48},
         "did you mean threshold_v"),
        ("charge_time", {"r_ohm": 1e6, "vdd_v": 3.3}, "needs threshold_v, timer_mhz"),
        ("charge_time", {"r_ohm": 1e6, "vdd_v": 3.3, "threshold_v": 5, "timer_mhz": 48}, "below vdd_v"),
        ("charge_share", {"sample_pf": -3}, "positive number"),
        ("charge_share", {"sample_pf": 20, "adc_bits": 12.5}, "whole number"),
        ("charge_share", {"sample_pf": 1e160}, "must be from 0.1 to 1e+06"),
        ("oscillator", {"r1_ohm": 1e3, "r2_ohm": 1e3, "timing_pf": 10, "gate_ms": float("inf")}, "positive"),
        ("sigma_delta", {}, "unknown method"),
    ]:
        with pytest.raises(UserError) as err:
            method_from_table(kind, table)
        assert words in str(err.value) and "\n" not in str(err.value)


def test_adc_rounding_quantisation_is_one_twelfth_of_a_code_squared():
    # Uniform quantiser (Widrow's quantisation model, any DSP textbook): rounding to a step q leaves an
    # error uniform on [-q/2, q/2], rms q / sqrt(12), mean 0, once the input spreads over many codes.
    cs = ChargeShare(sample_f=20e-12, adc_bits=12)
    c_f = np.random.default_rng(1).uniform(10e-12, 14e-12, 200_000)
    error = cs.counts(c_f) - cs.value(c_f)
    assert np.abs(error).max() <= 0.5 + 1e-9
    assert error.mean() == pytest.approx(0.0, abs=0.005)
    assert error.std() == pytest.approx(math.sqrt(1 / 12), rel=0.01) == cs.quantisation_rms


@pytest.mark.parametrize("method", [RCOscillator(10e3, 47e3, 10e-12, 0.01),
                                    ChargeTime(r_ohm=2.2e6, vdd_v=3.3, threshold_v=1.65, timer_hz=64e6)])
def test_counter_with_random_gate_phase_quantisation(method):
    # A counter read at a random phase U of its clock gives floor(x + U): unbiased (E = x), with variance
    # f (1 - f) for the fraction f of x; the mean over f uniform on [0, 1) is 1/2 - 1/3 = 1/6 (derivation
    # checked here with numpy's generator against the model's own counts).
    rng = np.random.default_rng(2)
    c_f = rng.uniform(10e-12, 30e-12, 200_000)
    error = method.counts(c_f, rng.random(c_f.shape)) - method.value(c_f)
    assert error.mean() == pytest.approx(0.0, abs=0.005)
    assert error.std() == pytest.approx(math.sqrt(1 / 6), rel=0.01) == method.quantisation_rms
