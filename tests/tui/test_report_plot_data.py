"""The report's plot data from passes (tui.report.plot_data) against the whole-array forms: the envelope
against `plots.envelope` over the whole trace (exact equality), the histogram counts against
`np.histogram` of the whole quiet and touched values (numpy the reference), and the SVG drawn from them
against `delta_plot` / `histogram_plot` of the whole arrays (the same picture, byte for byte). Passes are
cut at random sizes, 1 frame included, the frame source and the deltas at different cuts."""

from __future__ import annotations

import numpy as np
import pytest

from processing.frame_ranges import complement, normalised, to_mask, widened
from processing.frame_source import ArraySource
from tests.processing.helpers import cut_passes
from tui.report.plot_data import aligned, histograms, sketches
from tui.report.plots import (
    delta_plot,
    delta_plot_from,
    envelope,
    histogram_bins,
    histogram_plot,
    histogram_plot_from,
)


def _recording(seed: int, frames: int | None = None):
    rng = np.random.default_rng(seed)
    frames = int(rng.integers(1, 5000)) if frames is None else frames
    width = int(rng.integers(1, 4))
    t_s = np.cumsum(rng.uniform(0.005, 0.015, frames))  # uneven host times
    delta = np.rint(rng.normal(0, 3, (frames, width)))  # integer deltas: ties for the first min / max
    stretches = []
    for c in range(width):
        starts = rng.integers(0, frames, int(rng.integers(0, 5)))
        runs = normalised(((int(a), int(a + rng.integers(1, 300))) for a in starts), frames)
        for a, b in runs:
            delta[a:b, c] += 60
        stretches.append(runs)
    return rng, t_s, delta, stretches


@pytest.mark.parametrize("seed", range(30))
def test_envelope_from_passes_equals_the_whole_trace_envelope(seed: int) -> None:
    rng, t_s, delta, stretches = _recording(seed)
    points = int(rng.choice([8, 50, 1600]))
    source = ArraySource(t_s, delta.astype(np.int64), int(rng.integers(1, 400)))
    got = sketches(source, cut_passes(delta, rng, int(rng.integers(1, 300))), stretches, points)
    for c, runs in enumerate(stretches):
        t, v = envelope(t_s, delta[:, c], points)
        assert np.array_equal(got[c].t_s, t) and np.array_equal(got[c].delta, v)
        assert got[c].spans_s == [(float(t_s[a]), float(t_s[min(b, len(t_s)) - 1])) for a, b in runs]


def test_envelope_keeps_the_first_nan_and_the_first_of_equal_extremes() -> None:
    delta = np.zeros((40, 2))
    delta[[3, 9], 0] = 5.0  # two equal maxima in one bucket across a cut: the first is kept
    delta[12, 1] = np.nan
    delta[14, 1] = np.nan
    t_s = np.arange(40) / 10.0
    one = lambda: ((i, delta[i:i + 1]) for i in range(40))  # noqa: E731
    got = sketches(ArraySource(t_s, np.zeros((40, 2), np.int64), 7), one, [[], []], points=8)
    for c in range(2):
        t, v = envelope(t_s, delta[:, c], 8)
        assert np.array_equal(got[c].t_s, t) and np.array_equal(got[c].delta, v, equal_nan=True)


@pytest.mark.parametrize("seed", range(30))
def test_histogram_counts_from_passes_equal_numpy_over_the_whole_values(seed: int) -> None:
    rng, _t_s, delta, stretches = _recording(100 + seed)
    frames = len(delta)
    quiet = complement(widened([r for runs in stretches for r in runs], 5, frames), frames)
    touched = [[(a + 2, b - 2) for a, b in runs if b - a > 4] for runs in stretches]  # edges trimmed
    thresholds = [float(rng.integers(10, 80)) if rng.random() < 0.8 else None for _ in stretches]
    got = histograms(cut_passes(delta, rng, int(rng.integers(1, 300))), quiet, touched, thresholds)
    qmask = to_mask(quiet, frames)
    for c in range(len(stretches)):
        q, t = delta[qmask, c], delta[to_mask(touched[c], frames), c]
        both = np.concatenate([q, t])
        lo, hi = (float(both.min()), float(both.max())) if len(both) else (None, None)
        bins = histogram_bins(lo, hi, thresholds[c])
        assert np.array_equal(got[c].bins, bins)
        assert np.array_equal(got[c].quiet_counts, np.histogram(q, bins)[0])
        assert np.array_equal(got[c].touched_counts, np.histogram(t, bins)[0])
        assert got[c].quiet_counts.sum() == len(q) and got[c].touched_counts.sum() == len(t)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_the_pictures_drawn_from_passes_are_the_whole_arrays_pictures(seed: int) -> None:
    rng, t_s, delta, stretches = _recording(200 + seed, frames=[40, 3000, 2000][seed])
    frames = len(delta)
    quiet = complement(widened([r for runs in stretches for r in runs], 5, frames), frames)
    source = ArraySource(t_s, delta.astype(np.int64), 97)
    sketch = sketches(source, cut_passes(delta, rng), stretches)
    hist = histograms(cut_passes(delta, rng), quiet, stretches, [30.0] * len(stretches))
    qmask = to_mask(quiet, frames)
    for c, runs in enumerate(stretches):
        want = delta_plot(t_s, delta[:, c], 30.0, 20.0, runs, title="k: delta")
        assert delta_plot_from(sketch[c].t_s, sketch[c].delta, sketch[c].spans_s, 30.0, 20.0,
                               title="k: delta") == want
        want = histogram_plot(delta[qmask, c], delta[to_mask(runs, frames), c], 30.0, title="k: hist")
        assert histogram_plot_from(hist[c].bins, hist[c].quiet_counts, hist[c].touched_counts, 30.0,
                                   title="k: hist") == want


def test_sources_that_do_not_cover_the_same_frames_are_refused() -> None:
    src = ArraySource(np.arange(10.0), np.zeros((10, 1), np.int64), 3)
    with pytest.raises(ValueError, match="same frames"):
        list(aligned(src.pieces(), iter([(0, np.zeros((9, 1)))])))
    with pytest.raises(ValueError, match="follow on"):
        list(aligned(src.pieces(), iter([(0, np.zeros((4, 1))), (5, np.zeros((5, 1)))])))


def test_host_times_that_cannot_make_an_axis_are_drawn_in_order_and_said() -> None:
    # A damaged clock (finite times spanning 3.4e308 s: matplotlib cannot place them) must not crash the
    # report: the points are drawn in recording order and the axis says why. No warning either.
    import warnings

    from tui.report.plots import delta_plot_from

    t_s = np.array([-1.7e308, 1.7e308, 1.7e308, 1.7e308])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        svg = delta_plot_from(t_s, np.array([0.0, 3.0, 250.0, 1.0]), [(1.7e308, 1.7e308)], 120.0, 100.0)
    assert "recording order" in svg and "time (s)" not in svg
