"""The detail panel for the selected channel: a plot of reading and baseline with the threshold and
release lines (or the noise spectrum), the channel's settings and its recent events.

The plot is textual-plotext's PlotextPlot; it is redrawn at a few hertz, not at the table's rate. The
spectrum is computed in processing (`processing.measure.NoiseSpectrum`); this panel only draws it, or,
while its frames are still being collected, says how many there are of how many it needs.
"""

from __future__ import annotations

import itertools
import textwrap
from collections.abc import Collection, Sequence
from typing import Any, ClassVar

import numpy as np
from rich.text import Text
from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical
from textual.widgets import Static
from textual_plotext import PlotextPlot

from processing.settings import ChannelSettings
from tui.render.settings import settings_text
from tui.render.views import Series, Spectrum

__all__ = ["DetailPanel", "Series", "Spectrum", "detail_title", "envelope"]  # Series, Spectrum: old home


def _thin(x: np.ndarray, points: int) -> np.ndarray:
    if len(x) <= points:
        return x
    idx = np.linspace(0, len(x) - 1, points).astype(int)
    return x[idx]


def envelope(t: np.ndarray, x: np.ndarray, points: int) -> tuple[np.ndarray, np.ndarray]:
    """Min/max decimation to about `points` points: each bucket keeps its lowest and highest sample, in
    time order, so a one-frame spike at 1 kHz still shows on a plot a hundred cells wide."""
    n = len(x)
    if n <= points:
        return t, x
    edges = np.linspace(0, n, max(1, points // 2) + 1).astype(int)
    keep: list[int] = []
    for a, b in itertools.pairwise(edges):  # a few hundred buckets, twice a second
        lo, hi = a + int(np.argmin(x[a:b])), a + int(np.argmax(x[a:b]))
        keep.extend((lo, hi) if lo < hi else (hi, lo) if hi < lo else (lo,))
    idx = np.asarray(keep)
    return t[idx], x[idx]


def detail_title(name: str, spectrum: Spectrum | None, width: int) -> str:
    """The panel's title line: the plot's legend, or the spectrum's finding, whole at any width (the
    finding is what matters: the explanations give way first)."""
    if spectrum is None:
        choices = [f"{name}: reading ⣿  baseline ·  threshold =  release -  (f: noise spectrum)",
                   f"{name}: reading ⣿ baseline · threshold = release -"]
    else:
        summary, brief = spectrum.summary, spectrum.brief
        choices = [f"{name}: noise spectrum of the untouched delta: {summary} (f: back to the plot)",
                   f"{name} noise: {summary} (f: plot)", f"{name} noise: {summary}", f"{name}: {summary}",
                   f"{name} noise: {brief} (f: plot)", f"{name} noise: {brief}", f"{name}: {brief}", brief]
    return next((c for c in choices if len(c) <= width), choices[-1])


class DetailPanel(Vertical):
    ROLES = ("cursor", "name", "dim")
    COMPONENT_CLASSES: ClassVar[set[str]] = {f"detail-panel--{r}" for r in ROLES}

    def compose(self) -> ComposeResult:
        yield Static("", id="detail-title")
        with Horizontal(id="detail-body"):
            yield PlotextPlot(id="detail-plot")
            with Vertical(id="detail-side"):
                yield Static("", id="detail-settings")
                yield Static("", id="detail-events")

    def show(self, name: str, series: Series | None, spectrum: Spectrum | None, settings: ChannelSettings,
             selected_key: str, events: Sequence[str], rate_hz: float | None, polarity: int | None = 1,
             status: str = "", pending: Collection[str] = ()) -> None:
        styles = {r: self.get_component_rich_style(f"detail-panel--{r}", partial=True) for r in self.ROLES}
        self.query_one("#detail-title", Static).update(
            Text(detail_title(name, spectrum, max(20, self.size.width - 2)), no_wrap=True))
        settings_lines = settings_text(settings, selected_key, styles, rate_hz, polarity, status, pending)
        self.query_one("#detail-settings", Static).update(settings_lines)
        lines = Text("recent events, newest first\n", style=styles["dim"], no_wrap=True)
        for line in reversed(list(events)[-6:]):
            lines.append(line + "\n")
        if not events:
            lines.append("(none yet)", styles["dim"])
        self.query_one("#detail-events", Static).update(lines)
        self._plot(series, spectrum, settings, levels="threshold_counts" not in pending)

    def _plot(self, series: Series | None, spectrum: Spectrum | None, settings: ChannelSettings,
              levels: bool = True) -> None:
        """The spectrum, or reading and baseline with the threshold and release levels (`levels`: they
        are in force; a key still measuring its noise has none yet)."""
        widget = self.query_one("#detail-plot", PlotextPlot)
        plt = widget.plt
        plt.clear_data()
        plt.clear_figure()
        points = max(10, widget.size.width * 2)
        if spectrum is not None and spectrum.collecting:
            _say(plt, collecting_lines(spectrum), widget.size.width, widget.size.height)
        elif spectrum is not None:
            freq, amp = envelope(spectrum.freq_hz, spectrum.amplitude_counts, points)
            plt.plot(freq.tolist(), amp.tolist(), label="amplitude (counts)", marker="braille")
            plt.xlabel(f"Hz ({spectrum.coverage()})")
        elif series is not None and len(series.t_s) > 1:
            t_all = series.t_s - series.t_s[-1]
            t_reading, reading = envelope(t_all, series.reading, points)
            t = _thin(t_all, points)
            baseline = _thin(series.baseline, points)
            thr = baseline + series.polarity * settings.threshold_counts
            rel = baseline + series.polarity * settings.release_level_counts
            # Each line has its own marker so the plot reads without colour; the legend only where it fits.
            legend = widget.size.width >= 70
            lines = [(t, thr, "threshold", "="), (t, rel, "release", "-")] if levels else []
            for times, values, label, marker in (*lines, (t, baseline, "baseline", "·"),
                                                 (t_reading, reading, "reading", "braille")):
                plt.plot(times.tolist(), values.tolist(), label=label if legend else None, marker=marker)
            plt.xlabel("seconds (0 = now)")
        else:
            plt.title("waiting for frames")
        widget.refresh()


def collecting_lines(spectrum: Spectrum) -> list[str]:
    """What the plot says while the spectrum's frames are collected: how many of how many, and why."""
    lines = ["noise spectrum: collecting", f"untouched frames: {spectrum.samples} of {spectrum.needed}"]
    if spectrum.rate_hz > 0:
        lines.append(f"{spectrum.seconds(spectrum.samples)} of {spectrum.seconds(spectrum.needed)} needed")
    lines.append("the key is touched: let go" if spectrum.touched else "hands off the key")
    return lines


def _say(plt: Any, lines: list[str], width: int, height: int) -> None:
    """Lines of text in the plot's place (no axes: an empty plot would read as a flat spectrum)."""
    lines = [part for line in lines for part in textwrap.wrap(line, max(10, width - 1))]
    plt.frame(False)
    plt.xticks([])
    plt.yticks([])
    plt.xlim(0.0, 1.0)
    plt.ylim(0.0, 1.0)
    row = 1.0 / max(1, height - 1)  # one text line per row, from the second row down
    for i, line in enumerate(lines):
        plt.text(line, 0.0, 1.0 - (i + 1) * row, alignment="left", color="default", background="default")
