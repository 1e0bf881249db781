"""The row renderers draw exactly what a plain, obviously correct version draws, for any input.

`spark_pieces`, `bar_pieces` and the labels are written for speed (they run for every visible row at
every screen frame); the references below are the straightforward versions they replaced, kept here as
the independent check (hypothesis varies the values, widths and thresholds).
"""

from __future__ import annotations

from hypothesis import given, settings
from hypothesis import strategies as st
from rich.style import Style

from tui.render import Piece
from tui.render.bar import RELEASE_MARK, THRESHOLD_MARK, bar_pieces, bar_scale_counts
from tui.render.glyphs import state_label, verdict_label
from tui.render.spark import spark_pieces

STYLES = {"spark": Style(color="cyan"), "touched": Style(bold=True), "bar": Style(color="green"),
          "bar-empty": Style(dim=True), "threshold": Style(color="red"), "release": Style(color="yellow"),
          "pending": Style(italic=True)}
NULL = Style.null()
LEVELS = "▁▂▃▄▅▆▇█"
EIGHTHS = " ▏▎▍▌▋▊▉█"


def plain_spark(values: list[float], threshold: int, width: int, styles: dict[str, Style]) -> list[Piece]:
    """One bucket at a time: the largest value of each, a level per cell, a span per run hot or not."""
    if width <= 0:
        return []
    n = len(values)
    if n <= width:
        buckets = list(values)
    else:
        buckets = []
        for i in range(width):
            lo = i * n // width
            buckets.append(max(values[lo:max(lo + 1, (i + 1) * n // width)]))
    top = max([threshold * 8 / 7, 1.0, *buckets])
    style, hot = styles.get("spark", NULL), styles.get("touched", NULL)
    out: list[Piece] = [(" " * (width - len(buckets)), style)] if len(buckets) < width else []
    runs: list[tuple[bool, str]] = []
    for value in buckets:
        glyph = LEVELS[int(max(0.0, value) * (len(LEVELS) - 1) / top + 0.5)]
        is_hot = value >= threshold > 0
        if runs and runs[-1][0] == is_hot:
            runs[-1] = (is_hot, runs[-1][1] + glyph)
        else:
            runs.append((is_hot, glyph))
    return out + [(text, hot if is_hot else style) for is_hot, text in runs]


def plain_bar(delta: float, threshold: int, release: int, width: int, role: str,
              styles: dict[str, Style]) -> list[Piece]:
    """A cell at a time: each cell's glyph and style, then neighbours of one style joined."""
    if width <= 0:
        return []
    per_cell = bar_scale_counts(threshold, width)
    eighths = int(max(0.0, delta) / per_cell * 8)
    cells = []
    for i in range(width):
        fill = min(8, max(0, eighths - 8 * i))
        cells.append(("█" if fill == 8 else EIGHTHS[fill], styles.get(role if fill else "bar-empty", NULL)))
    if delta < 0:
        cells[0] = ("◂", cells[0][1])
    t_cell = min(width - 1, round(threshold / per_cell))
    r_cell = min(width - 1, max(0, round(release / per_cell)))
    cells[t_cell] = (THRESHOLD_MARK, styles.get("threshold", NULL))
    cells[r_cell] = (RELEASE_MARK, styles.get("release", NULL))  # the release mark wins a shared cell
    if eighths > width * 8:  # past the end of the scale: the last cell says so, over a mark too
        cells[-1] = ("▸", styles.get(role, NULL))
    out: list[Piece] = []
    marks = {t_cell, r_cell}
    for i, (glyph, style) in enumerate(cells):
        if out and i not in marks and i - 1 not in marks and out[-1][1] == style:
            out[-1] = (out[-1][0] + glyph, style)
        else:
            out.append((glyph, style))
    return out


values = st.lists(st.one_of(st.integers(-5000, 5000).map(float), st.floats(-1e4, 1e6)), max_size=120)


@settings(max_examples=400, deadline=None)
@given(values, st.integers(-5, 4000), st.integers(0, 60))
def test_sparkline_matches_the_plain_version(vals: list[float], threshold: int, width: int) -> None:
    for styles in (STYLES, {}):
        assert spark_pieces(vals, threshold, width, styles) == plain_spark(vals, threshold, width, styles)


@settings(max_examples=400, deadline=None)
@given(st.one_of(st.integers(-10**6, 10**7).map(float), st.floats(-1e5, 1e7)), st.integers(0, 5000),
       st.integers(0, 5000), st.integers(0, 80), st.sampled_from(["bar", "pending", "touched"]))
def test_bar_matches_the_plain_version(delta: float, threshold: int, release: int, width: int,
                                       role: str) -> None:
    release = min(release, threshold)
    assert bar_pieces(delta, threshold, release, width, STYLES, role) == \
        plain_bar(delta, threshold, release, width, role, STYLES)


@given(st.sampled_from(["idle", "TOUCHED", "touched", "measuring", "learning", "released", "nonsense_state",
                        "", "debounce"]))
def test_labels_do_not_depend_on_the_fast_path(name: str) -> None:
    class Named:  # an enum-like state: its name is looked up the slow way
        def __init__(self, name: str) -> None:
            self.name = name

    assert state_label(name) == state_label(Named(name.upper())) == state_label(Named(name))
    assert verdict_label(name) == verdict_label(Named(name))
