"""The detail panel for the selected channel: a plot of reading and baseline with the threshold and
release lines (or the noise spectrum), the channel's settings and its recent events.

The plot is textual-plotext's PlotextPlot; it is redrawn at a few hertz, not at the table's rate. The
spectrum is computed in processing (`processing.measure.NoiseSpectrum`); this panel only draws it, or,
while its frames are still being collected, says how many there are of how many it needs.

The panel owns its zoom (`ZOOM_LEVELS`, `zoom_out`/`zoom_in`; the live screen binds the keys from
`ZOOM_KEYS`): the first level is the last seconds from the fine history, the others the long view
(`LongView`, the session's decimated history from `processing.history`): each bucket's lowest and
highest reading drawn as an envelope, the baseline through their middle, and the baseline's drift
across the view in the title, on a time axis in s, min or h.
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

from processing.measure import ChannelQuality
from processing.settings import ChannelSettings
from tui.render.quality import verdict_lines
from tui.render.settings import settings_text
from tui.render.views import LongView, Series, Spectrum, span_words, time_unit

__all__ = ["DetailPanel", "Series", "Spectrum", "detail_title", "envelope"]  # Series, Spectrum: old home

# (the level's word, its window in seconds; None: the whole session). The first is the fine plot.
ZOOM_LEVELS: tuple[tuple[str, float | None], ...] = (
    ("8 s", 8.0), ("1 min", 60.0), ("10 min", 600.0), ("1 h", 3600.0), ("session", None))
# The keys, for the screen to bind (the table keeps the focus, so the panel cannot bind them itself):
# (key, zoom step, footer word, help sentence, binding id).
ZOOM_KEYS = (
    ("z", 1, "zoom", "Detail panel: zoom out (8 s, 1 min, 10 min, 1 h, the whole session)", "chan.zoom_out"),
    ("Z", -1, "zoom in", "Detail panel: zoom back in", "chan.zoom_in"),
)


MIN_EVENT_LINES = 3  # the recent events keep this many lines before the verdict takes a second line


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


def long_title(name: str, view: LongView | None, level: str, width: int) -> str:
    """The zoomed-out plot's title: what it covers and the baseline's drift across it, whole at any
    width (the drift is what matters: the legend gives way first)."""
    if view is None or len(view.series) < 2:
        long_text = f"{name}: last {level}: no history yet (z/Z: zoom)"
        return long_text if len(long_text) <= width else f"{name}: {level}: none yet"
    covered = span_words(view.covered_s())
    what = f"last {covered}" if view.window_s is not None and view.covered_s() >= view.window_s * 0.99 \
        else f"whole session, {covered}"
    drift = f"baseline drift {view.drift_counts():+.0f} counts"
    choices = [f"{name}: {what} · {drift} · reading min–max ⣿ baseline · (z/Z: zoom)",
               f"{name}: {what} · {drift} · (z/Z: zoom)", f"{name}: {what} · {drift}",
               f"{name}: {covered} · drift {view.drift_counts():+.0f}"]
    return next((c for c in choices if len(c) <= width), choices[-1])


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

    zoom = 0  # index into ZOOM_LEVELS

    @property
    def zoom_window_s(self) -> float | None:
        """The zoomed-out plot's window (None: the whole session); 8 s at the first level."""
        return ZOOM_LEVELS[self.zoom][1]

    @property
    def zoomed_out(self) -> bool:
        return self.zoom > 0

    def zoom_by(self, step: int) -> str:
        """Zoom out (+1) or in (-1); returns the level's word (the screen tells it)."""
        self.zoom = max(0, min(len(ZOOM_LEVELS) - 1, self.zoom + step))
        return ZOOM_LEVELS[self.zoom][0]

    def compose(self) -> ComposeResult:
        yield Static("", id="detail-title")
        with Horizontal(id="detail-body"):
            yield PlotextPlot(id="detail-plot")
            with Vertical(id="detail-side"):
                yield Static("", id="detail-settings")
                yield Static("", id="detail-events")

    def show(self, name: str, series: Series | None, spectrum: Spectrum | None, settings: ChannelSettings,
             selected_key: str, events: Sequence[str], rate_hz: float | None, polarity: int | None = 1,
             status: str = "", pending: Collection[str] = (), long: LongView | None = None,
             quality: ChannelQuality | None = None) -> None:
        """`long`: the zoomed-out history when `zoomed_out` (the spectrum, when asked for, wins);
        `quality`: the key's SNR verdict, shown with what it rests on under its settings."""
        styles = {r: self.get_component_rich_style(f"detail-panel--{r}", partial=True) for r in self.ROLES}
        width = max(20, self.size.width - 2)
        title = long_title(name, long, ZOOM_LEVELS[self.zoom][0], width) \
            if self.zoomed_out and spectrum is None else detail_title(name, spectrum, width)
        self.query_one("#detail-title", Static).update(Text(title, no_wrap=True))
        settings_lines = settings_text(settings, selected_key, styles, rate_hz, polarity, status, pending)
        side = self.query_one("#detail-side", Vertical).content_size
        # two lines for the verdict only where the recent events keep a few lines (not at 80x24)
        spare = side.height - len(settings_lines.plain.splitlines()) - 1 >= 2 + MIN_EVENT_LINES
        for line in verdict_lines(quality, max(20, side.width or 40), 2 if spare else 1):
            settings_lines.append("\n")
            settings_lines.append(line)
        self.query_one("#detail-settings", Static).update(settings_lines)
        lines = Text("recent events, newest first\n", style=styles["dim"], no_wrap=True)
        for line in reversed(list(events)[-6:]):
            lines.append(line + "\n")
        if not events:
            lines.append("(none yet)", styles["dim"])
        self.query_one("#detail-events", Static).update(lines)
        if self.zoomed_out and spectrum is None:
            self._plot_long(long, settings, levels="threshold_counts" not in pending)
        else:
            self._plot(series, spectrum, settings, levels="threshold_counts" not in pending)

    def _plot_long(self, view: LongView | None, settings: ChannelSettings, levels: bool) -> None:
        """The session's decimated history: each bucket's lowest and highest reading (spikes kept), the
        baseline through the middle of its own, and the threshold above it; time in s, min or h."""
        widget = self.query_one("#detail-plot", PlotextPlot)
        plt = widget.plt
        plt.clear_data()
        plt.clear_figure()
        if view is None or len(view.series) < 2:
            _say(plt, ["long view: no history yet", "it fills as frames come"], widget.size.width,
                 widget.size.height)
            widget.refresh()
            return
        s = view.series
        # the window, or less while the session is shorter (the title then says "whole session")
        covered = max(view.covered_s(), 1e-9)
        span = min(view.window_s, covered) if view.window_s is not None else covered
        unit, scale = time_unit(span)
        t = ((s.t_first_s + s.t_last_s) / 2 - view.now_s) / scale
        points = max(10, widget.size.width * 2)
        # min and max of each bucket, in time order, thinned again only if the buckets outnumber cells
        t_env = np.repeat(t, 2)
        env = np.column_stack((s.reading_min, s.reading_max)).ravel().astype(np.float64)
        t_env, env = envelope(t_env, env, points)
        baseline = ((s.baseline_min + s.baseline_max) / 2).astype(np.float64)
        t_b, baseline = _thin(t, points), _thin(baseline, points)
        legend = widget.size.width >= 70
        if levels:
            thr = baseline + view.polarity * settings.threshold_counts
            plt.plot(t_b.tolist(), thr.tolist(), label="threshold" if legend else None, marker="=")
        plt.plot(t_env.tolist(), env.tolist(), label="reading min–max" if legend else None, marker="braille")
        # the baseline last, over the readings: its drift is what the long view is for
        plt.plot(t_b.tolist(), baseline.tolist(), label="baseline" if legend else None, marker="·")
        left = -span / scale
        plt.xlim(left, 0.0)
        ticks = np.linspace(left, 0.0, 5 if widget.size.width >= 40 else 3)
        plt.xticks(ticks.tolist(), [_tick(x) for x in ticks])
        plt.xlabel(f"{_UNIT_WORDS[unit]} (0 = now; a bucket is {span_words(view.bucket_s)})"
                   if view.bucket_s >= 1 else f"{_UNIT_WORDS[unit]} (0 = now)")
        widget.refresh()

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


_UNIT_WORDS = {"s": "seconds", "min": "minutes", "h": "hours"}


def _tick(x: float) -> str:
    """An axis label: `-10`, `-7.5`, `0` (no `-0.0`)."""
    if abs(x) < 1e-9:
        return "0"
    text = f"{x:.1f}" if abs(x) < 10 else f"{x:.0f}"
    return text[:-2] if text.endswith(".0") else text


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
