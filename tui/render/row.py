"""One channel as one line of text, with columns that shrink to the width available.

The fixed columns (name, numbers, state) keep their width down to 80 cells; the bar and the
sparkline share what is left, and below about 60 cells the sparkline and then the baseline go.
"""

from __future__ import annotations

from dataclasses import dataclass

from rich.text import Text

from tui.render import NULL, Piece, Styles, pick, to_text
from tui.render.bar import bar_pieces
from tui.render.glyphs import state_label, verdict_label
from tui.render.spark import spark_pieces
from tui.render.views import ChannelView


@dataclass(frozen=True, slots=True)
class RowLayout:
    width: int
    name: int
    number: int
    baseline: bool
    bar: int
    spark: int
    noise: int
    snr: int
    state: int


def row_layout(width: int, name_width: int = 8) -> RowLayout:
    """Column widths for a table `width` cells wide (cells, not counting the one-cell gaps).

    Rows fit from 60 cells up; below that the table widget crops them at the right edge.
    """
    name = max(4, min(name_width, 12))
    number, noise, snr, state = 6, 5, 7, 7
    baseline = True
    fixed = 2 + name + 1 + (number + 1) * 3 + noise + 1 + snr + 1 + state
    room = width - fixed - 2  # two gaps around bar and sparkline
    if room < 16:
        baseline = False
        room += number + 1
    if room < 8:
        name = max(4, name - (8 - room))
        room = 8
    spark = 0 if room < 18 else min(48, (room - 1) * 2 // 5)  # 80 cells: the bar keeps 15, its title fits
    bar = max(4, room - spark - (1 if spark else 0))
    return RowLayout(width, name, number, baseline, bar, spark, noise, snr, state)


def _num(value: float | None, width: int, digits: int = 0) -> str:
    if value is None:
        return "--".rjust(width)
    text = f"{value:.{digits}f}"
    if len(text) > width:
        text = f"{value:.0f}" if digits else text[:width]
    return text.rjust(width)[-width:]


def _bar_title(width: int) -> str:
    for title in ("delta bar: ┃ threshold  ╎ release", "┃ threshold  ╎ release", "┃threshold ╎release",
                  "┃touch ╎release", "┃touch ╎off", "bar"):
        if len(title) <= width:
            return title.ljust(width)
    return " " * width


def header_line(layout: RowLayout, styles: Styles) -> Text:
    cols = ["  ", "key".ljust(layout.name), " ", "read".rjust(layout.number), " "]
    if layout.baseline:
        cols += ["base".rjust(layout.number), " "]
    cols += ["delta".rjust(layout.number), " ", _bar_title(layout.bar)]
    if layout.spark:
        cols += [" ", "recent".ljust(layout.spark)]
    cols += [" ", "noise".rjust(layout.noise), " ", "SNR".ljust(layout.snr), " ", "state".ljust(layout.state)]
    return Text("".join(cols), style=pick(styles, "header"), no_wrap=True, end="")


def channel_line(view: ChannelView, layout: RowLayout, selected: bool, styles: Styles) -> Text:
    """The row for one channel; `selected` puts a `▶` in front (so the cursor reads without colour), a
    `≈` after it marks provisional settings, and the state reads `noise` / `learn` until the channel
    may report touches (its quiet second, its direction)."""
    return to_text(row_pieces(view, layout, selected, styles))


def row_pieces(view: ChannelView, layout: RowLayout, selected: bool, styles: Styles) -> list[Piece]:
    """The row as pieces, exactly `layout.width` cells or fewer; the table adds the selected background."""
    st = state_label(view.state if view.phase == "ready" else view.phase)
    verdict = verdict_label(view.verdict)
    get = styles.get
    plain = NULL
    number = layout.number
    mark = ("▶" if selected else " ") + ("≈" if view.provisional else " ")
    out: list[Piece] = [(mark, get("cursor", plain)),
                        (view.name[: layout.name].ljust(layout.name), get("edited" if view.edited else "name",
                                                                          plain)),
                        (" " + _num(view.reading, number) + " ", plain)]
    if layout.baseline:
        out += [(_num(view.baseline, number), get("dim", plain)), (" ", plain)]
    state_style = get(st.role, plain)
    out += [(_num(view.delta, number), state_style), (" ", plain)]
    out += bar_pieces(view.delta, view.threshold, view.release, layout.bar, styles, st.role)
    if layout.spark:
        out.append((" ", plain))
        out += spark_pieces(view.spark, view.threshold, layout.spark, styles)
    noise = view.noise_pp
    out.append((" " + _num(noise, layout.noise, 1 if noise is not None and noise < 100 else 0) + " ", plain))
    snr = "--" if view.snr is None else f"{view.snr:.1f}" if view.snr < 100 else f"{view.snr:.0f}"
    out += [(f"{snr:>4} {verdict.glyph}".ljust(layout.snr)[: layout.snr], get(verdict.role, plain)),
            (" ", plain),
            (f"{st.glyph} {st.word}".ljust(layout.state)[: layout.state], state_style)]
    return out
