"""Sparklines from a short history of deltas, one cell per bucket, scaled to the threshold."""

from __future__ import annotations

from collections.abc import Sequence
from functools import lru_cache
from operator import itemgetter

from rich.text import Text

from tui.render import Piece, Styles, pick, to_text

_LEVELS = "▁▂▃▄▅▆▇█"


def downsample_max(values: Sequence[float], width: int) -> list[float]:
    """Split `values` into `width` buckets (newest last) and keep each bucket's largest value.

    The maximum, not the mean, so a short touch between two screen frames still shows.
    """
    n = len(values)
    if width <= 0 or n == 0:
        return []
    if n <= width:
        return list(values)
    pairs = _pair_pickers(n, width)
    if pairs is not None:  # buckets of one or two values: the larger of the first and the last
        firsts, lasts = pairs
        return list(map(max, firsts(values), lasts(values)))
    return [max(values[lo:hi]) for lo, hi in _buckets(n, width)]


@lru_cache(maxsize=64)
def _pair_pickers(n: int, width: int) -> tuple[itemgetter, itemgetter] | None:
    """For buckets of at most two values (the screen's usual case: 48 points on 20-48 cells), getters of
    each bucket's first and last value: no slice per bucket. None when a bucket is wider (or one cell)."""
    bounds = _buckets(n, width)
    if width < 2 or any(hi - lo > 2 for lo, hi in bounds):
        return None
    return itemgetter(*[lo for lo, _ in bounds]), itemgetter(*[hi - 1 for _, hi in bounds])


@lru_cache(maxsize=64)
def _buckets(n: int, width: int) -> tuple[tuple[int, int], ...]:
    """Bucket bounds of `downsample_max` (the same few sizes come every screen frame: kept)."""
    out = []
    for i in range(width):
        lo = i * n // width
        out.append((lo, max(lo + 1, (i + 1) * n // width)))
    return tuple(out)


def sparkline(
    values: Sequence[float], threshold_counts: int, width: int, styles: Styles, role: str = "spark"
) -> Text:
    """`width` cells, right-aligned (newest at the right). A value at the threshold reaches level 7 of 8."""
    return to_text(spark_pieces(values, threshold_counts, width, styles, role))


def spark_pieces(values: Sequence[float], threshold_counts: int, width: int, styles: Styles,
                 role: str = "spark") -> list[Piece]:
    text: list[Piece] = []
    if width <= 0:
        return text
    buckets = downsample_max(values, width)
    peak = max(buckets) if buckets else 0.0
    top = max(float(threshold_counts) * 8 / 7, 1.0, peak)
    style = pick(styles, role)
    if len(buckets) < width:
        text.append((" " * (width - len(buckets)), style))
    scale = (len(_LEVELS) - 1) / top
    levels = _LEVELS
    glyphs = [levels[int(value * scale + 0.5)] if value > 0.0 else levels[0] for value in buckets]
    if not (threshold_counts > 0 and peak >= threshold_counts):  # nothing at the threshold: one span
        if glyphs:
            text.append(("".join(glyphs), style))
        return text
    hot = pick(styles, "touched")
    start = 0
    run_hot = buckets[0] >= threshold_counts
    for i, value in enumerate(buckets):  # one span per run of cells at or above the threshold, or below it
        is_hot = value >= threshold_counts
        if is_hot != run_hot:
            text.append(("".join(glyphs[start:i]), hot if run_hot else style))
            start, run_hot = i, is_hot
    text.append(("".join(glyphs[start:]), hot if run_hot else style))
    return text
