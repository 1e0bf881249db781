"""The simulated sensor: aliasing of mains hum, determinism, touches, disturbances and unit faults."""

import dataclasses

import numpy as np
import pytest

from devices.boards import load_board
from devices.model import BoardModel, UnitFaults
from devices.spec import NoiseSpec, ScriptTouch
from devices.touches import TouchPlan


def quiet_board(name="greenhouse", **changes):
    spec = load_board(name)
    fields = {"noise": NoiseSpec(white_pf=0.0), "script": (), "loop_s": 0.0, **changes}
    return dataclasses.replace(spec, **fields)


def model(spec, seed=1, faults=None, script=True):
    return BoardModel(spec, seed, TouchPlan(spec, seed, script=script), faults)


def peak_hz(signal, rate_hz):
    # numpy's real FFT; the strongest bin after removing the mean.
    spectrum = np.abs(np.fft.rfft(signal - signal.mean()))
    return np.fft.rfftfreq(len(signal), 1 / rate_hz)[int(np.argmax(spectrum))]


def test_mains_60hz_sampled_at_100hz_aliases_to_40hz():
    # Sampling theorem (any DSP textbook): a 60 Hz tone sampled at 100 Hz appears at |60 - 100| = 40 Hz.
    spec = quiet_board(rate_hz=100.0, noise=NoiseSpec(white_pf=0.0, mains_hz=60, hum_pf=0.5))
    cap, _ = model(spec).capacitance(0, 1000)
    assert peak_hz(cap[:, 0], 100.0) == pytest.approx(40.0, abs=0.2)
    counts = model(spec).readings(0, 1000)
    assert peak_hz(counts[:, 0].astype(float), 100.0) == pytest.approx(40.0, abs=0.2)


def test_rectifier_ripple_100hz_sampled_at_120hz_aliases_to_20hz():
    # Same theorem: 100 Hz (second harmonic of 50 Hz mains) sampled at 120 Hz appears at 20 Hz, while
    # the 50 Hz fundamental is below Nyquist (60 Hz) and stays at 50 Hz.
    spec = quiet_board(rate_hz=120.0, noise=NoiseSpec(white_pf=0.0, mains_hz=50, hum_pf=0.1,
                                                      hum_harmonic2=4.0))
    cap, _ = model(spec).capacitance(0, 1200)
    assert peak_hz(cap[:, 0], 120.0) == pytest.approx(20.0, abs=0.2)
    spectrum = np.abs(np.fft.rfft(cap[:, 0] - cap[:, 0].mean()))
    freqs = np.fft.rfftfreq(1200, 1 / 120.0)
    assert spectrum[np.argmin(np.abs(freqs - 50.0))] > 10 * np.median(spectrum)


def test_same_seed_same_readings_whatever_the_block_sizes():
    spec = load_board("greenhouse")
    whole = model(spec, seed=7).readings(0, 1000)
    m = model(spec, seed=7)
    parts = np.concatenate([m.readings(a, b - a) for a, b in [(0, 1), (1, 300), (300, 301), (301, 1000)]])
    assert np.array_equal(whole, parts)
    assert not np.array_equal(whole, model(spec, seed=8).readings(0, 1000))


@pytest.mark.parametrize("board, sign", [("greenhouse", 1), ("pumphouse", -1), ("grid64", -1)])
def test_touch_moves_counts_in_the_methods_direction(board, sign):
    spec = load_board(board)
    spec = dataclasses.replace(spec, script=(ScriptTouch("finger", (spec.names[1],), 1.0, 1.0),), loop_s=0.0)
    m = BoardModel(spec, 3, TouchPlan(spec, 3, random_per_min=0))
    rate = spec.rate_hz
    idle = m.readings(int(0.5 * rate), int(0.4 * rate))[:, 1].mean()
    touched = m.readings(int(1.3 * rate), int(0.4 * rate))[:, 1].mean()
    assert np.sign(touched - idle) == sign == spec.method.polarity
    noise = m.readings(int(0.5 * rate), int(0.4 * rate))[:, 1].std()
    assert abs(touched - idle) > 5 * noise  # the bundled boards all work (SNR well above 5)


def test_crosstalk_reaches_neighbours_only():
    spec = quiet_board()
    spec = dataclasses.replace(spec, script=(ScriptTouch("finger", ("zone2",), 0.0, 5.0),))
    on = model(spec).capacitance(60, 1)[0][0]
    off = model(dataclasses.replace(spec, script=())).capacitance(60, 1)[0][0]
    delta = on - off
    names = spec.names
    assert delta[names.index("zone2")] > 0
    for neighbour in ("zone1", "zone3"):  # 20 mm away, within reach
        assert delta[names.index(neighbour)] == pytest.approx(0.05 * delta[names.index("zone2")], rel=0.05)
    assert delta[names.index("stop")] == pytest.approx(0.0, abs=1e-18)


def test_water_film_adds_less_than_a_finger_and_no_hum():
    spec = quiet_board(noise=NoiseSpec(white_pf=0.0, hum_touch_pf=0.5))
    finger = dataclasses.replace(spec, script=(ScriptTouch("finger", ("zone3",), 0.0, 5.0),))
    water = dataclasses.replace(spec, script=(ScriptTouch("water", ("zone3", "zone4"), 0.0, 5.0,
                                                          wet_area_m2=100e-6),))
    base = model(spec).capacitance(60, 60)[0][:, 2]
    wf, wp = model(water).capacitance(60, 60)
    ff, fp = model(finger).capacitance(60, 60)
    assert 0 < (wf[:, 2] - base).mean() < (ff[:, 2] - base).mean()
    assert wp[:, 2].max() == 0.0 and fp[:, 2].max() == 1.0  # only a body brings hum with it
    assert (ff[:, 2] - base).std() > 10 * (wf[:, 2] - base).std()


def test_temperature_drift_is_slow():
    spec = quiet_board(noise=NoiseSpec(white_pf=0.0, drift_pf_per_k=0.05, temp_swing_k=5,
                                       temp_period_s=100))
    cap, _ = model(spec).capacitance(0, 60 * 100)
    swing = cap[:, 0].max() - cap[:, 0].min()
    assert swing == pytest.approx(2 * 0.05e-12 * 5 * 1.0, rel=0.35)  # drift gains vary 0.7..1.3
    assert np.abs(np.diff(cap[:, 0])).max() < swing / 100  # no jumps between frames


def test_unit_faults():
    spec = load_board("greenhouse")
    spec = dataclasses.replace(spec, script=(ScriptTouch("finger", ("zone1",), 1.0, 1.0),
                                             ScriptTouch("finger", ("zone2",), 1.0, 1.0)), loop_s=0.0)
    faults = UnitFaults(open_pads={0}, shorted_pads={4}, noisy_pads={5: 20.0})
    good = model(spec).readings(0, 120)
    bad = model(spec, faults=faults).readings(0, 120)
    # open pad: far below its normal reading (only the pin is left) and deaf to the finger
    assert bad[:30, 0].mean() < 0.3 * good[:30, 0].mean()
    assert abs(bad[70:110, 0].mean() - bad[:30, 0].mean()) < 3
    assert bad[70:110, 1].mean() - bad[:30, 1].mean() > 30  # the other key still works
    assert (bad[:, 4] == spec.method.max_count).all()  # shorted: the charge timer runs out
    assert bad[:, 5].std() > 8 * good[:, 5].std()


def test_who_touches_matters_an_isolated_person_gives_less():
    # Human-body model (common practice, no source): the finger plate is in series with the body.
    spec = quiet_board()
    standing = dataclasses.replace(spec, script=(ScriptTouch("finger", ("zone1",), 0.0, 5.0),))
    isolated = dataclasses.replace(spec, script=(ScriptTouch("finger", ("zone1",), 0.0, 5.0, body_f=5e-12),))
    base = model(spec).capacitance(60, 1)[0][0, 0]
    d_standing = model(standing).capacitance(60, 1)[0][0, 0] - base
    d_isolated = model(isolated).capacitance(60, 1)[0][0, 0] - base
    assert d_isolated < 0.9 * d_standing
    plate = d_standing * 200e-12 / (200e-12 - d_standing)  # undo the series with the standing body
    assert d_isolated == pytest.approx(plate * 5e-12 / (plate + 5e-12), rel=1e-6)
