"""Measures against outside references: numpy.std, statistics.pstdev, numpy FFT of synthetic sines."""

import statistics

import numpy as np
import pytest

from processing.detections import KeyState
from processing.measure import History, Measures, VerdictBounds, alias_hz, explain_peak, spectrum_peak

RELEASED, TOUCHED = int(KeyState.RELEASED), int(KeyState.TOUCHED)


def feed(m, deltas, states, t0=0.0):
    deltas = np.asarray(deltas, np.int64).reshape(len(deltas), -1)
    states = np.asarray(states, np.int8).reshape(len(states), -1)
    t = t0 + np.arange(len(deltas)) / m.rate_hz
    m.ingest(t, deltas + 1000, deltas, states)


def test_noise_rms_matches_numpy_std_and_pstdev():
    rng = np.random.default_rng(3)
    m = Measures(1, rate_hz=100.0, window_s=2.0)
    d = rng.integers(-9, 10, 1000)
    feed(m, d, np.zeros(1000))
    noise = m.noise(0)
    window = d[-210:-10]  # 2 s at 100 Hz; the newest 10 (0.1 s settle guard) wait for the frames after them
    assert noise.samples == 200
    assert noise.rms_counts == pytest.approx(np.std(window), rel=1e-12)  # reference: numpy.std
    assert noise.rms_counts == pytest.approx(statistics.pstdev(window.tolist()), rel=1e-12)  # stdlib
    assert noise.pp_counts == window.max() - window.min()


def test_noise_skips_touched_frames_and_signal_is_their_median():
    m = Measures(1, rate_hz=100.0, window_s=1.0, settle_s=0.0)  # no settle guard: every released frame
    deltas = [1, -1] * 50 + [200, 210, 190, 205, 3000] + [2, -2] * 50
    states = [RELEASED] * 100 + [TOUCHED] * 5 + [RELEASED] * 100
    feed(m, deltas, states)
    q = m.quality(0)
    assert q.noise.samples == 100 and q.noise.pp_counts == 4  # the newest 100 released frames
    assert q.signal_counts == 205  # median of 190, 200, 205, 210, 3000
    assert q.snr_pp == pytest.approx(205 / 4) and q.snr_rms == pytest.approx(205 / 2)
    assert q.verdict == "solid"


def test_verdict_bounds_configurable():
    # Common practice, no source: below 5 not reliable, 5-10 marginal, above 10 robust.
    b = VerdictBounds()
    assert [b.verdict(x) for x in (None, 4.9, 5.0, 10.0, 10.1)] == ["unmeasured", "weak", "marginal",
                                                                     "marginal", "solid"]
    assert VerdictBounds(weak_below=3, solid_above=6).verdict(7) == "solid"


@pytest.mark.parametrize(("tone_hz", "shows_hz"), [(60.0, 40.0), (150.0, 50.0), (120.0, 20.0), (30.0, 30.0)])
def test_alias_frequency_against_fft_of_sampled_sine(tone_hz, shows_hz):
    # Reference: a numpy FFT of the sampled sine peaks at the alias; fs 100 Hz: 60 -> 40, 150 -> 50.
    fs, n = 100.0, 1000
    t = np.arange(n) / fs
    x = np.sin(2 * np.pi * tone_hz * t + 0.3)
    peak_bin = int(np.argmax(np.abs(np.fft.rfft(x))[1:])) + 1
    assert peak_bin * fs / n == pytest.approx(shows_hz)
    assert alias_hz(tone_hz, fs) == pytest.approx(shows_hz)


def test_spectrum_peak_names_the_mains_source():
    fs, n = 100.0, 400
    t = np.arange(n) / fs
    rng = np.random.default_rng(1)
    x = 6 * np.sin(2 * np.pi * 60 * t) + rng.normal(0, 0.5, n)  # 60 Hz mains seen at 40 Hz
    peak = spectrum_peak(x, fs)
    assert peak.freq_hz == pytest.approx(40.0) and peak.mains_hz == 60.0 and peak.harmonic == 1
    assert peak.amplitude_counts == pytest.approx(6, rel=0.1)
    assert "60 Hz" in peak.describe()
    x = 5 * np.sin(2 * np.pi * 13.0 * t)
    peak = spectrum_peak(x, fs)
    assert peak.freq_hz == pytest.approx(13.0) and peak.mains_hz is None
    # at fs 100 Hz: 120 Hz (second harmonic of 60 Hz) shows at 20 Hz; 50 Hz sits at Nyquist itself
    assert explain_peak(20.0, 100.0, tolerance_hz=0.25) == (60.0, 2, 20.0)
    assert explain_peak(50.0, 100.0, tolerance_hz=0.25) == (50.0, 1, 50.0)
    assert explain_peak(33.0, 100.0, tolerance_hz=0.25) is None


def test_spectrum_from_measures_uses_released_run():
    m = Measures(1, rate_hz=100.0, window_s=4.0)
    t = np.arange(400) / 100
    feed(m, np.round(8 * np.sin(2 * np.pi * 40 * t)).astype(int), np.zeros(400))
    assert m.spectrum(0).freq_hz == pytest.approx(40.0)
    feed(m, [0] * 10, [TOUCHED] * 10, t0=4.0)
    assert m.spectrum(0) is None  # nothing released since the touch


def test_history_memory_is_bounded_and_ordered():
    h = History(2, 100)
    before = h.deltas.nbytes
    for k in range(50):
        n = 37 if k % 3 else 260
        rows = np.arange(h.written, h.written + n)
        h.append(rows.astype(float), np.stack([rows, -rows], 1), np.stack([rows, -rows], 1), np.zeros((n, 2)))
    assert h.deltas.nbytes == before and len(h) == 100
    t, r, d, _ = h.last(100)
    assert np.array_equal(d[:, 0], np.arange(h.written - 100, h.written))
    assert np.array_equal(t, d[:, 0].astype(float)) and np.array_equal(r, d)


def test_vectorised_qualities_equal_per_channel_quality():
    rng = np.random.default_rng(8)
    m = Measures(3, rate_hz=100.0, window_s=1.0, history_frames=300)
    for k in range(7):
        d = rng.integers(-6, 7, (90, 3))
        s = np.zeros((90, 3), np.int8)
        if k in (2, 5):
            s[40:60, 1] = TOUCHED
            d[40:60, 1] += 200
        feed(m, d, s, t0=k)
        for got, want in zip(m.qualities(), [m.quality(c) for c in range(3)], strict=True):
            assert got.verdict == want.verdict and got.signal_counts == want.signal_counts
            assert (got.noise is None) == (want.noise is None)
            if got.noise:  # summation order differs between the vectorised and per-channel forms
                assert got.noise.rms_counts == pytest.approx(want.noise.rms_counts, rel=1e-12)
                assert (got.noise.pp_counts, got.noise.samples) == (want.noise.pp_counts, want.noise.samples)


def test_column_ring_keeps_the_newest_selected_values():
    # Reference: collections.deque(maxlen=capacity) fed the same selected values one by one.
    from collections import deque

    from processing.measure import ColumnRing
    rng = np.random.default_rng(11)
    ring = ColumnRing(50, 3)
    refs = [deque(maxlen=50) for _ in range(3)]
    for _ in range(40):
        n = int(rng.integers(1, 120))
        values = rng.integers(-100, 100, (n, 3))
        mask = rng.random((n, 3)) < rng.choice([0.0, 0.5, 1.0], 3)
        ring.push(values, mask)
        for c in range(3):
            refs[c].extend(values[mask[:, c], c].tolist())
            assert ring.ordered(c).tolist() == list(refs[c])
    assert ring.data.shape == (50, 3)


def test_touch_signal_forgets_after_clear():
    m = Measures(1, rate_hz=100.0)
    feed(m, [300] * 10, [TOUCHED] * 10)
    assert m.touch_signal(0) == 300
    m.clear_touch_signal(0)
    assert m.touch_signal(0) is None
    feed(m, [100] * 10, [TOUCHED] * 10)
    assert m.touch_signal(0) == 100


def test_definition_text_states_the_forms_window_and_bounds():
    text = Measures(1, rate_hz=100.0, window_s=3.0, bounds=VerdictBounds(4, 12)).definition()
    assert "median delta while touched" in text and "last 3 s" in text and "RMS" in text
    assert "below 4 weak" in text and "above 12 solid" in text


def test_slow_drift_on_a_60_hz_board_is_drift_not_mains():
    # At a 60 Hz frame rate 60 Hz mains aliases to 0 Hz (alias formula as above), so a drift peak in the
    # first bins sits "within tolerance" of it; a ramp is drift, and the check must say so.
    fs, n = 60.0, 120
    rng = np.random.default_rng(3)
    x = np.linspace(0.0, 12.0, n) + rng.normal(0, 0.3, n)  # 12 counts of drift over the 2 s window
    peak = spectrum_peak(x, fs)
    assert peak.near_dc and peak.mains_hz is None
    assert "drift" in peak.describe() and "alias of" not in peak.describe()
    # A real tone at the same board is still named: 50 Hz mains at fs 60 Hz shows at 10 Hz.
    t = np.arange(n) / fs
    peak = spectrum_peak(4 * np.sin(2 * np.pi * 50 * t) + rng.normal(0, 0.3, n), fs)
    assert not peak.near_dc and peak.mains_hz == 50.0 and peak.freq_hz == pytest.approx(10.0)


def test_white_noise_is_not_named_as_a_mains_alias():
    # Gaussian white noise has a flat expected spectrum (numpy's generator as the reference source):
    # its strongest bin is a fluke, not a tone, and must not be blamed on mains.
    fs, n = 60.0, 120
    flukes = 0
    for seed in range(40):
        peak = spectrum_peak(np.random.default_rng(seed).normal(0, 2.0, n), fs)
        flukes += peak.distinct
        if not peak.distinct:
            assert peak.mains_hz is None and "no distinct tone" in peak.describe()
    assert flukes <= 4  # a tone threshold that white noise seldom reaches
    # The same noise with a real 50 Hz hum (aliased to 10 Hz at fs 60 Hz) is named.
    t = np.arange(n) / fs
    rng = np.random.default_rng(7)
    peak = spectrum_peak(rng.normal(0, 2.0, n) + 3.0 * np.sin(2 * np.pi * 50 * t), fs)
    assert peak.distinct and peak.mains_hz == 50.0 and peak.freq_hz == pytest.approx(10.0)


# ---------------------------------------------------------------- the spectrum the screen draws


def test_amplitude_spectrum_reads_a_tone_s_amplitude_through_the_hann_coherent_gain():
    # A sine of amplitude 5 counts on bin 40 of 400 frames at 100 Hz (10 Hz). Reference: F. J. Harris,
    # "On the use of windows for harmonic analysis with the DFT", Proc. IEEE 66(1), 1978, table 1:
    # Hann's coherent gain is 0.50 (taken out, the bin reads the tone's amplitude) and its worst-case
    # scalloping loss, a tone half-way between two bins, is 1.42 dB.
    from processing.measure import amplitude_spectrum

    fs, n, a = 100.0, 400, 5.0
    t = np.arange(n) / fs
    freq, amp = amplitude_spectrum(a * np.sin(2 * np.pi * 10.0 * t + 0.3) + 7.0, fs)
    k = int(np.argmax(amp))
    assert freq[k] == pytest.approx(10.0) and amp[0] == 0.0
    assert amp[k] == pytest.approx(a, rel=0.01)
    np.testing.assert_allclose(freq, np.fft.rfftfreq(n, 1 / fs))  # numpy's own bin frequencies
    _, amp = amplitude_spectrum(a * np.sin(2 * np.pi * 10.125 * t), fs)  # half a bin off
    assert a * 10 ** (-1.42 / 20) * 0.99 <= amp.max() <= a
    assert amp.max() == pytest.approx(a * 10 ** (-1.42 / 20), rel=0.02)


def test_amplitude_spectrum_matches_scipy_periodogram_bin_by_bin():
    # scipy.signal.periodogram(scaling="spectrum") gives each bin's power as |X_k|^2 / sum(w)^2, doubled
    # for the one-sided bins below Nyquist: the amplitude of a sine is sqrt(2 P) there, sqrt(P) at
    # Nyquist (an even length). Same window (numpy's symmetric Hann), mean removed by both.
    from scipy.signal import periodogram

    from processing.measure import amplitude_spectrum

    rng = np.random.default_rng(5)
    for n in (64, 65, 400):
        x = rng.normal(0, 3.0, n) + 4 * np.cos(2 * np.pi * 0.5 * np.arange(n))  # a tone at Nyquist too
        freq, amp = amplitude_spectrum(x, 60.0)
        f_ref, p_ref = periodogram(x, 60.0, window=np.hanning(n), scaling="spectrum", detrend="constant")
        np.testing.assert_allclose(freq, f_ref)
        inner = slice(1, (n + 1) // 2)
        np.testing.assert_allclose(amp[inner], np.sqrt(2 * p_ref[inner]), rtol=1e-9)
        if n % 2 == 0:
            assert amp[-1] == pytest.approx(np.sqrt(p_ref[-1]), rel=1e-9)


def test_noise_spectrum_says_how_many_frames_it_has_of_how_many_it_needs():
    from processing.measure import MIN_SPECTRUM_SAMPLES

    m = Measures(1, rate_hz=100.0, window_s=2.0, settle_s=0.0)
    feed(m, [1, -1, 2, 0, -2] * 2, [RELEASED] * 10)
    s = m.noise_spectrum(0)
    assert s.collecting and not s.touched and len(s.freq_hz) == 0
    assert (s.samples, s.needed, s.window_frames) == (10, MIN_SPECTRUM_SAMPLES, 200)
    assert s.summary == "collecting 10 of 16 untouched frames (0.10 of 0.16 s): hands off"
    feed(m, [90] * 5, [TOUCHED] * 5, t0=0.1)
    s = m.noise_spectrum(0)
    assert s.collecting and s.touched and s.samples == 0 and "waiting for its release" in s.summary
    t = np.arange(400) / 100
    feed(m, np.round(6 * np.sin(2 * np.pi * 40 * t)).astype(int), [RELEASED] * 400, t0=0.15)
    s = m.noise_spectrum(0)
    assert not s.collecting and s.samples == 200 and s.freq_hz[0] > 0  # bins above DC only
    assert s.freq_hz[int(np.argmax(s.amplitude_counts))] == pytest.approx(40.0)
    assert s.peak == m.spectrum(0) and s.summary == s.peak.describe()
    assert s.coverage() == "2.00 s of 2.00 s untouched, 0.5 Hz per bin"
    assert s.brief == "40.0 Hz: alias of 60 Hz mains"
