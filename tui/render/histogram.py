"""A small terminal histogram of untouched and touched deltas, as a rich renderable.

Two rows of bar glyphs share one delta axis: the untouched deltas (noise, crosstalk) and the touched
ones; an optional threshold is marked under the axis. It reads without colour (the rows are labelled and
the bars are glyphs); colour is only a help, from the `styles` roles "untouched", "touched" and
"threshold" (none given: plain text). Drawn by the guided capture's results (the `tune` and `check`
HTML reports draw their own histograms with matplotlib, `tui/report/plots.py`). Plain rich, no Textual.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from rich.console import Console, ConsoleOptions, RenderResult
from rich.measure import Measurement
from rich.text import Text

from tui.render import Styles, pick

ROLES = ("untouched", "touched", "threshold")

BARS = " ▁▂▃▄▅▆▇█"
PLAIN_BARS = " .:-=+*#%@"  # for consoles that cannot show block elements


def bin_counts(values: np.ndarray, lo: float, hi: float, bins: int) -> np.ndarray:
    """Counts of `values` in `bins` equal bins over [lo, hi] (numpy.histogram's rule)."""
    if len(values) == 0:
        return np.zeros(bins, np.int64)
    counts, _ = np.histogram(np.asarray(values, np.float64), bins=bins, range=(lo, hi))
    return counts


def bar_row(counts: np.ndarray, glyphs: str = BARS) -> str:
    """One glyph per bin, scaled to the row's own largest bin; any non-empty bin shows at least one step."""
    top = int(counts.max()) if len(counts) else 0
    if top == 0:
        return glyphs[0] * len(counts)
    steps = len(glyphs) - 1
    levels = np.where(counts > 0, np.maximum(1, np.ceil(counts / top * steps)), 0).astype(int)
    return "".join(glyphs[v] for v in levels)


class DeltaHistogram:
    """Untouched and touched deltas of one key on a shared axis, `threshold` marked with ^."""

    def __init__(self, untouched: Sequence[float] | np.ndarray, touched: Sequence[float] | np.ndarray,
                 threshold: float | None = None, width: int = 40, label_width: int = 10,
                 styles: Styles | None = None) -> None:
        self.untouched = np.asarray(untouched, np.float64)
        self.touched = np.asarray(touched, np.float64)
        self.threshold = threshold
        self.width = width
        self.label_width = label_width
        self.styles: Styles = styles or {}

    def axis(self) -> tuple[float, float]:
        values = [v for v in (self.untouched, self.touched) if len(v)]
        lo = min([float(v.min()) for v in values] + ([self.threshold] if self.threshold is not None else []),
                 default=0.0)
        hi = max([float(v.max()) for v in values] + ([self.threshold] if self.threshold is not None else []),
                 default=1.0)
        return (lo, hi if hi > lo else lo + 1.0)

    def lines(self, bins: int, plain: bool = False) -> list[Text]:
        lo, hi = self.axis()
        glyphs = PLAIN_BARS if plain else BARS
        out = []
        for label, values in (("untouched", self.untouched), ("touched", self.touched)):
            line = Text(f"{label:<{self.label_width}}")
            line.append(bar_row(bin_counts(values, lo, hi, bins), glyphs), style=pick(self.styles, label))
            out.append(line)
        left, right = f"{lo:.0f}", f"{hi:.0f}"
        axis = Text(" " * self.label_width + left + " " * max(1, bins - len(left) - len(right)) + right)
        out.append(axis)
        if self.threshold is not None:
            pos = min(bins - 1, int((self.threshold - lo) / (hi - lo) * bins))
            marker = " " * (self.label_width + pos) + f"^ threshold {self.threshold:.0f}"
            out.append(Text(marker, style=pick(self.styles, "threshold")))
        return out

    def __rich_console__(self, console: Console, options: ConsoleOptions) -> RenderResult:
        bins = max(8, min(self.width, options.max_width - self.label_width))
        plain = console.options.legacy_windows or not console.options.encoding.lower().startswith("utf")
        yield from self.lines(bins, plain)

    def __rich_measure__(self, console: Console, options: ConsoleOptions) -> Measurement:
        return Measurement(self.label_width + 8, self.label_width + self.width)
