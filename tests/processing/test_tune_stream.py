"""Streaming tuning (`processing.tuning.tune_recording`, frames gone through in pieces, nothing frames-long
held) against the whole-array tuning it replaced (`tests/processing/tune_reference.py`: every key's trace
in memory, numpy's median, percentile and std over whole arrays). Touches, counts, medians, pp, the
suggestions and crosstalk agree exactly, whatever the pieces and however small the selections' memory;
RMS figures to 1e-12 (numpy.std sums pairwise, the stream sums the squares about an exact mean)."""

from __future__ import annotations

import numpy as np
import pytest

from processing.recording_format import Mark, Recording
from processing.stretches import expand_polarity
from processing.suggest import Suggestion
from processing.tuning import tune_recording
from protocol.events import BoardInfo
from tests.processing.helpers import block
from tests.processing.tune_reference import reference_tune

RMS_REL = 1e-12


def made_up(seed: int, frames: int, width: int, rate_hz: float, polarity: tuple[int, ...]) -> np.ndarray:
    """Noise, drift, a few touches per key (some overlapping another key's), a neighbour moved a little."""
    rng = np.random.default_rng(seed)
    r = 20_000 + rng.integers(-4, 5, (frames, width)) + np.cumsum(rng.normal(0, 0.05, (frames, width)), 0)
    sign = expand_polarity(polarity, width) if polarity else np.ones(width, np.int64)
    for c in range(width):
        for _ in range(int(rng.integers(0, 4))):
            a = int(rng.integers(0, frames))
            n = int(rng.integers(rate_hz * 0.15, rate_hz * 1.5))
            step = int(rng.integers(60, 400))
            r[a:a + n, c] += sign[c] * step
            r[a:a + n, (c + 1) % width] += sign[(c + 1) % width] * step // 8
    return np.rint(r).astype(np.int64)


def recording(r: np.ndarray, rate_hz: float, polarity: tuple[int, ...], marks: list[Mark]) -> Recording:
    names = tuple(f"k{c}" for c in range(r.shape[1]))
    info = BoardInfo(0.0, {}, proto=1, channels=r.shape[1], rate_hz=rate_hz, names=names, polarity=polarity)
    return Recording("made-up.csv", 1, events=[info, block(r, rate_hz=rate_hz)], marks=marks)


def touch_marks(r: np.ndarray, rate_hz: float, rng: np.random.Generator) -> list[Mark]:
    marks = [Mark(0.2, "quiet-start"), Mark(1.5, "quiet-end")]
    for c in range(r.shape[1]):
        a = float(rng.uniform(2, len(r) / rate_hz - 1))
        marks += [Mark(a, "touch-start", f"k{c}"), Mark(a + 0.4, "touch-end", f"k{c}")]
    return marks


def case(seed: int) -> tuple[Recording, float, tuple[int, ...], list[Mark]]:
    """A made-up recording: rate, keys, length, polarity, marks (every third) drawn from `seed`."""
    rng = np.random.default_rng(1000 + seed)
    rate_hz = float(rng.choice([50.0, 100.0, 250.0, 1000.0]))
    width = int(rng.integers(1, 6))
    frames = int(rng.integers(max(64, rate_hz * 4), rate_hz * 20))
    polarity = tuple(int(x) for x in rng.choice([-1, 1], width))
    r = made_up(seed, frames, width, rate_hz, polarity)
    marks = touch_marks(r, rate_hz, rng) if seed % 3 == 0 else []
    return recording(r, rate_hz, polarity, marks), rate_hz, polarity, marks


def assert_same(result, keys, found) -> None:
    assert len(result.keys) == len(keys)
    for got, want in zip(result.keys, keys, strict=True):
        assert got.trace.stretches == want.stretches
        assert (got.trace.quiet_frames, got.trace.touched_frames) == (want.quiet_frames, want.touched_frames)
        f, g = got.figures, want.figures
        assert (f.noise_pp_counts, f.signal_counts) == (g.noise_pp_counts, g.signal_counts)
        for a, b in ((f.noise_rms_counts, g.noise_rms_counts), (f.snr_rms, g.snr_rms), (f.snr_pp, g.snr_pp)):
            assert (a is None) == (b is None) and (a is None or a == pytest.approx(b, rel=RMS_REL))
        if isinstance(want.outcome, Suggestion):
            assert isinstance(got.outcome, Suggestion)
            a, b = got.outcome, want.outcome
            fields = ("threshold_counts", "hysteresis_counts", "touch_debounce_frames",
                      "release_debounce_frames", "reasons", "signal_counts", "noise_pp_counts")
            assert [getattr(a, f) for f in fields] == [getattr(b, f) for f in fields]
            assert a.noise_rms_counts == pytest.approx(b.noise_rms_counts, rel=RMS_REL)
        else:
            assert got.outcome == want.outcome
        t, u = got.touched_noise, want.touched_noise
        assert (t is None) == (u is None)
        if t is not None:
            assert (t.samples, t.touches, t.window_frames, t.pp_counts, t.peak) == (
                u.samples, u.touches, u.window_frames, u.pp_counts, u.peak)
            assert t.rms_counts == pytest.approx(u.rms_counts, rel=RMS_REL)
    assert result.couplings == found


@pytest.mark.parametrize("seed", range(16))
def test_streaming_tuning_equals_the_whole_array_tuning(seed: int) -> None:
    rng = np.random.default_rng(2000 + seed)
    rec, rate_hz, polarity, marks = case(seed)
    t_s, _, readings = rec.arrays()
    piece_frames = int(rng.choice([1 + int(rng.integers(0, 50)), 997, 4096, 1 << 15]))
    budget = int(rng.choice([64, 1000, 1 << 22]))
    result = tune_recording(rec, piece_frames=piece_frames, budget_values=budget)
    before = [float(k.before.threshold_counts) for k in result.keys]
    keys, found = reference_tune(t_s, readings, result.profile.names, polarity, rate_hz, marks,
                                 result.profile.sliders, before)
    assert_same(result, keys, found)
    if not marks:
        assert any(k.trace.stretches for k in result.keys) or not any(k.stretches for k in keys)


def test_the_made_up_recordings_reach_every_part() -> None:
    """The cases above are worth comparing: across them keys are touched and tuned, refused, crosstalk
    and noise while touched are measured, with and without marks."""
    found = {"touched": 0, "tuned": 0, "refused": 0, "couplings": 0, "held_noise": 0, "marked": 0}
    for seed in range(16):
        result = tune_recording(case(seed)[0])
        found["touched"] += sum(bool(k.trace.stretches) for k in result.keys)
        found["tuned"] += sum(k.measured for k in result.keys)
        found["refused"] += sum(not k.measured for k in result.keys)
        found["couplings"] += len(result.couplings)
        found["held_noise"] += sum(k.touched_noise is not None for k in result.keys)
        found["marked"] += result.from_marks
    assert all(count >= 3 for count in found.values()), found
