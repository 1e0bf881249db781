"""Noise while touched from passes (processing.touched_noise_stream) against the whole-trace form
(processing.crosstalk.touched_noise, the reference: residuals of each whole touch, np.std, np.ptp and the
spectrum of the longest touch's residuals), with passes cut at random (1 frame included, cuts inside
touches). The RMS is held to 1e-12 relative of np.std (numpy's own two-pass std)."""

from __future__ import annotations

import numpy as np
import pytest

from processing import touched_noise_stream
from processing.crosstalk import level_window, residuals, touched_noise
from processing.frame_ranges import normalised
from processing.measure import spectrum_peak
from processing.touched_noise_stream import touched_noise_by_key
from tests.processing.helpers import cut_passes


def _recording(rng: np.random.Generator, frames: int, keys: int, rate_hz: float
               ) -> tuple[np.ndarray, list[list[tuple[int, int]]]]:
    t_s = np.arange(frames) / rate_hz
    full = rng.normal(0, 2, (frames, keys)) + 40 * np.sin(2 * np.pi * 0.05 * t_s)[:, None]
    full += 5 * np.sin(2 * np.pi * 17.0 * t_s)[:, None]  # a tone for the spectrum to find
    full = np.rint(full) if rng.random() < 0.5 else full  # integer deltas: many equal values, ties
    stretches = []
    for _ in range(keys):
        starts = rng.integers(0, frames, int(rng.integers(0, 6)))
        runs = normalised(((int(a), int(a + rng.integers(0, 120))) for a in starts), frames)
        stretches.append(runs)
    return full, stretches


def _same(got, want) -> None:
    if want is None:
        assert got is None
        return
    assert (got.samples, got.touches, got.window_frames) == (want.samples, want.touches, want.window_frames)
    assert got.pp_counts == want.pp_counts
    assert got.rms_counts == pytest.approx(want.rms_counts, rel=1e-12, abs=1e-300)
    assert got.peak == want.peak


@pytest.mark.parametrize("seed", range(40))
def test_streamed_touched_noise_equals_the_whole_trace_form(seed: int,
                                                            monkeypatch: pytest.MonkeyPatch) -> None:
    rng = np.random.default_rng(seed)
    if seed % 2:  # spectrum buffers for a few keys at a time: the long touches' residuals over more passes
        monkeypatch.setattr(touched_noise_stream, "SPECTRUM_BUDGET", int(rng.integers(16, 400)))
    rate_hz = float(rng.choice([10.0, 50.0, 100.0]))
    full, stretches = _recording(rng, int(rng.integers(1, 700)), int(rng.integers(1, 5)), rate_hz)
    got = touched_noise_by_key(cut_passes(full, rng, int(rng.integers(1, 90))), stretches, rate_hz)
    for c, runs in enumerate(stretches):
        _same(got[c], touched_noise([full[a:b, c] for a, b in runs], rate_hz))


def test_one_frame_pieces_and_a_touch_over_many_cuts() -> None:
    rng = np.random.default_rng(7)
    full, _ = _recording(rng, 600, 2, 100.0)
    stretches = [[(3, 590)], [(0, 100), (100, 250), (400, 600)]]  # one touch ending on the last frame
    one = lambda: ((i, full[i:i + 1]) for i in range(len(full)))  # noqa: E731
    got = touched_noise_by_key(one, stretches, 100.0)
    for c, runs in enumerate(stretches):
        want = touched_noise([full[a:b, c] for a, b in runs], 100.0)
        assert want is not None and want.peak is not None
        _same(got[c], want)


def test_rms_is_stable_far_from_zero() -> None:
    # Residuals of a touch with a large level and a skewed noise: a one-pass sum of squares would lose
    # digits here; np.std (two-pass) is the reference.
    rng = np.random.default_rng(3)
    full = 1e7 + rng.exponential(1.0, (5000, 1))
    stretches = [[(0, 5000)]]
    got = touched_noise_by_key(cut_passes(full, rng, 7), stretches, 100.0)[0]
    want = touched_noise([full[:, 0]], 100.0)
    _same(got, want)


def test_the_spectrum_is_of_the_longest_touchs_first_cap_residuals(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(touched_noise_stream, "SPECTRUM_CAP", 64)
    rng = np.random.default_rng(11)
    full, _ = _recording(rng, 900, 1, 100.0)
    stretches = [[(0, 150), (200, 600), (620, 800)]]  # the longest (400 frames) is the second
    got = touched_noise_by_key(cut_passes(full, rng, 30), stretches, 100.0)[0]
    window = level_window(100.0)
    first = residuals(full[200:600, 0], window)[:64]
    assert got is not None and got.peak == spectrum_peak(first, 100.0)
    whole = touched_noise([full[a:b, 0] for a, b in stretches[0]], 100.0)
    assert whole is not None and got.peak != whole.peak  # the cap did change the spectrum: 64 vs 380 bins
    assert (got.samples, got.pp_counts) == (whole.samples, whole.pp_counts)  # the rest is not capped


def test_too_few_residuals_give_none_without_a_pass() -> None:
    def no_pass():
        raise AssertionError("no pass is needed when no key has MIN_FRAMES residuals")

    assert touched_noise_by_key(no_pass, [[(0, 10)], []], 100.0) == [None, None]


@pytest.mark.parametrize("runs", [[(-1, 5)], [(5, 3)], [(10, 40)]])
def test_touches_outside_the_recording_are_refused(runs: list[tuple[int, int]]) -> None:
    full = np.zeros((30, 1))
    with pytest.raises(ValueError, match="touch"):
        touched_noise_by_key(cut_passes(full, np.random.default_rng(0)), [runs], 10.0)


def test_touches_out_of_order_and_tied_for_longest_take_the_first_listed() -> None:
    rng = np.random.default_rng(5)
    full, _ = _recording(rng, 800, 1, 100.0)
    full[500:700, 0] += 30 * np.sin(2 * np.pi * 31.0 * np.arange(200) / 100.0)  # its own tone
    for runs in ([(500, 700), (100, 300)], [(100, 300), (500, 700)], [(650, 760), (0, 640)]):
        got = touched_noise_by_key(cut_passes(full, rng, 40), [runs], 100.0)[0]
        want = touched_noise([full[a:b, 0] for a, b in runs], 100.0)
        assert want is not None and want.peak is not None
        _same(got, want)


def test_long_touches_of_many_keys_take_more_passes_not_more_memory(monkeypatch: pytest.MonkeyPatch) -> None:
    # Four keys each held for 500 frames; buffers for one key's residuals at a time: four spectrum batches
    # (two ride on the RMS passes, two more passes), every peak still the whole-trace one.
    monkeypatch.setattr(touched_noise_stream, "SPECTRUM_BUDGET", 600)
    rng = np.random.default_rng(11)
    full, _ = _recording(rng, 800, 4, 100.0)
    stretches = [[(100, 600)]] * 4
    calls = []

    def passes():
        calls.append(1)
        return ((a, full[a:a + 64]) for a in range(0, len(full), 64))

    got = touched_noise_by_key(passes, stretches, 100.0)
    assert len(calls) == 4
    for c, runs in enumerate(stretches):
        want = touched_noise([full[a:b, c] for a, b in runs], 100.0)
        assert want is not None and want.peak is not None
        _same(got[c], want)
