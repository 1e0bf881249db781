"""The report's plots as inline SVG text, drawn with matplotlib's object API (no pyplot, no display).

Long traces are reduced to a min/max envelope per pixel column before drawing, so a long recording
gives a small file that still shows every spike. Text stays text in the SVG (`svg.fonttype: none`) and
ids are seeded, so the same data gives the same file.
"""

from __future__ import annotations

import io
import itertools
from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # matplotlib is optional: imported only when a report is drawn
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

MAX_POINTS = 1600
COLOURS = {"delta": "#33658a", "threshold": "#c0392b", "release": "#e67e22", "touched": "#86bbd8",
           "untouched": "#55828b", "touch": "#f6ae2d", "limit": "#7d3c98"}


def _figure(width_in: float = 6.4, height_in: float = 2.4) -> tuple[Figure, Axes]:
    import matplotlib

    matplotlib.rcParams["svg.fonttype"] = "none"
    matplotlib.rcParams["svg.hashsalt"] = "padtune"
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width_in, height_in), dpi=100, layout="constrained")
    return fig, fig.add_subplot()


def _svg(fig: Figure) -> str:
    buf = io.StringIO()
    # No metadata block: it only adds an RDF header with outside namespace URLs to every plot.
    fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None, "Format": None, "Type": None})
    text = buf.getvalue()
    return text[text.index("<svg"):]  # the XML prolog and doctype do not belong inside HTML


MAX_AXIS_S = 1e9  # about 32 years: host times spanning more come from a damaged clock, not a recording


def envelope(t_s: np.ndarray, values: np.ndarray, points: int = MAX_POINTS) -> tuple[np.ndarray, np.ndarray]:
    """At most `points` (t, v) pairs keeping each bucket's min and max, in time order."""
    n = len(values)
    if n <= points:
        return t_s, values
    buckets = points // 2
    edges = np.linspace(0, n, buckets + 1).astype(int)
    ts, vs = [], []
    for a, b in itertools.pairwise(edges):
        seg = values[a:b]
        i, j = int(np.argmin(seg)), int(np.argmax(seg))
        for k in sorted((i, j)):
            ts.append(t_s[a + k])
            vs.append(seg[k])
    return np.array(ts), np.array(vs)


def delta_plot(t_s: np.ndarray, delta_counts: np.ndarray, threshold_counts: float | None,
               release_counts: float | None, stretches: Sequence[tuple[int, int]] = (), title: str = "",
               noise_limit_pp_counts: float | None = None) -> str:
    """Delta over time, touched stretches shaded, threshold and release lines, the noise limit band."""
    t, v = envelope(np.asarray(t_s, float), np.asarray(delta_counts, float))
    spans_s = [(float(t_s[a]), float(t_s[min(b, len(t_s)) - 1])) for a, b in stretches]
    return delta_plot_from(t, v, spans_s, threshold_counts, release_counts, title, noise_limit_pp_counts)


def delta_plot_from(t_s: np.ndarray, delta_counts: np.ndarray, spans_s: Sequence[tuple[float, float]],
                    threshold_counts: float | None, release_counts: float | None, title: str = "",
                    noise_limit_pp_counts: float | None = None) -> str:
    """`delta_plot` of points already reduced (`envelope`, or `plot_data.sketches` for a recording read
    in passes), touches shaded between their (first, last) times `spans_s`. Host times that cannot make
    an axis (not finite, or spanning more than `MAX_AXIS_S`: a damaged clock) are drawn against the
    points' order instead, unshaded, and the axis says so."""
    t_s = np.asarray(t_s, np.float64)
    xlabel = "time (s)"
    if len(t_s) and not (np.isfinite(t_s).all() and float(t_s.max()) - float(t_s.min()) <= MAX_AXIS_S):
        t_s, spans_s = np.arange(len(t_s), dtype=np.float64), []
        xlabel = "points in recording order (its host times cannot make a time axis)"
    fig, ax = _figure()
    for i, (start_s, end_s) in enumerate(spans_s):
        ax.axvspan(start_s, end_s, color=COLOURS["touched"], alpha=0.35, lw=0,
                   label="touched" if i == 0 else None)
    ax.plot(t_s, delta_counts, color=COLOURS["delta"], lw=0.8, label="delta")
    if threshold_counts is not None:
        ax.axhline(threshold_counts, color=COLOURS["threshold"], lw=1, ls="--",
                   label=f"threshold {threshold_counts:g}")
    if release_counts is not None:
        ax.axhline(release_counts, color=COLOURS["release"], lw=1, ls=":",
                   label=f"release {release_counts:g}")
    if noise_limit_pp_counts is not None:  # a pp limit drawn as a band centred on zero delta
        half = noise_limit_pp_counts / 2
        ax.axhspan(-half, half, color=COLOURS["limit"], alpha=0.12, lw=0,
                   label=f"noise limit pp {noise_limit_pp_counts:g}")
    ax.set_xlabel(xlabel)
    ax.set_ylabel("delta (counts)")
    if title:
        ax.set_title(title, fontsize=10)
    ax.legend(loc="upper left", bbox_to_anchor=(1.0, 1.0), fontsize=7, frameon=False)  # beside, not over
    ax.grid(alpha=0.25)
    return _svg(fig)


def histogram_plot(untouched_counts: np.ndarray, touched_counts: np.ndarray, threshold_counts: float | None,
                   title: str = "", labels: tuple[str, str] = ("untouched", "touched")) -> str:
    """Histograms (log frame counts) of untouched and touched deltas, with the threshold line."""
    untouched, touched, threshold = untouched_counts, touched_counts, threshold_counts
    fig, ax = _figure(4.2, 2.4)
    values = [np.asarray(v, float) for v in (untouched, touched) if len(v)]
    lo = min((float(v.min()) for v in values), default=None)
    hi = max((float(v.max()) for v in values), default=None)
    bins = histogram_bins(lo, hi, threshold)
    if len(untouched):
        ax.hist(untouched, bins=bins, color=COLOURS["untouched"], alpha=0.8, label=labels[0])
    if len(touched):
        ax.hist(touched, bins=bins, color=COLOURS["touch"], alpha=0.8, label=labels[1])
    return _histogram_finish(fig, ax, threshold, title)


def histogram_plot_from(bins: np.ndarray, untouched_frames: np.ndarray, touched_frames: np.ndarray,
                        threshold_counts: float | None, title: str = "",
                        labels: tuple[str, str] = ("untouched", "touched")) -> str:
    """`histogram_plot` of values already counted into `bins` (`histogram_bins`; `plot_data.histograms`
    for a recording read in passes): the same bars, each bin's count given as the weight of its centre."""
    fig, ax = _figure(4.2, 2.4)
    centres = (bins[:-1] + bins[1:]) / 2
    for counts, colour, label in ((untouched_frames, "untouched", labels[0]),
                                  (touched_frames, "touch", labels[1])):
        if np.sum(counts):
            ax.hist(centres, bins=bins, weights=np.asarray(counts, float), color=COLOURS[colour], alpha=0.8,
                    label=label)
    return _histogram_finish(fig, ax, threshold_counts, title)


def histogram_bins(lo: float | None, hi: float | None, threshold_counts: float | None,
                   count: int = 60) -> np.ndarray:
    """`histogram_plot`'s bin edges: `count` edges from the lowest to the highest value (None: no values;
    0 to 1 then), widened to take in the threshold; one count wide when they are all one value."""
    lo = 0.0 if lo is None else lo
    hi = 1.0 if hi is None else hi
    if threshold_counts is not None:
        lo, hi = min(lo, threshold_counts), max(hi, threshold_counts)
    return np.linspace(lo, hi if hi > lo else lo + 1, count)


def _histogram_finish(fig: Figure, ax: Axes, threshold: float | None, title: str) -> str:
    if threshold is not None:
        ax.axvline(threshold, color=COLOURS["threshold"], lw=1, ls="--", label="threshold")
    ax.set_yscale("log")
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

    # Plain frame counts at 1-2-5 steps (20, 50, 100, 200), never crowded labels such as 6x10^1.
    ax.yaxis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
    ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _pos: f"{v:g}"))
    ax.yaxis.set_minor_formatter(NullFormatter())
    ax.set_xlabel("delta (counts)")
    ax.set_ylabel("frames")
    if title:
        ax.set_title(title, fontsize=10)
    ax.legend(loc="upper center", fontsize=7, frameon=False)
    return _svg(fig)
