"""Sparklines from a short history of deltas, one cell per bucket, scaled to the threshold."""

from __future__ import annotations

from collections.abc import Sequence

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
    out = []
    for i in range(width):
        lo = i * n // width
        hi = max(lo + 1, (i + 1) * n // width)
        out.append(max(values[lo:hi]))
    return out


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
    top = max([float(threshold_counts) * 8 / 7, 1.0, *buckets])
    style = pick(styles, role)
    hot = pick(styles, "touched")
    if len(buckets) < width:
        text.append((" " * (width - len(buckets)), style))
    scale = (len(_LEVELS) - 1) / top
    run: list[str] = []
    run_hot = False
    for value in buckets:  # one span per run of cells at or above the threshold, or below it
        is_hot = value >= threshold_counts > 0
        if is_hot != run_hot and run:
            text.append(("".join(run), hot if run_hot else style))
            run = []
        run_hot = is_hot
        run.append(_LEVELS[int(max(0.0, value) * scale + 0.5)])
    if run:
        text.append(("".join(run), hot if run_hot else style))
    return text
