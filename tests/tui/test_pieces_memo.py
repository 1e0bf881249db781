"""The delta bar's pieces are kept by their inputs (`tui.render.memo`): the same inputs give the same
pieces, and a new styles mapping (a theme change makes one) is drawn in its own styles, never with the
pieces kept for the old one. The reference is the bar drawn afresh (`_bar_pieces`, no memo)."""

from __future__ import annotations

from rich.style import Style

from tui.render import bar
from tui.render.memo import PiecesMemo


def test_same_inputs_same_pieces_and_a_new_mapping_draws_in_its_own_styles() -> None:
    old = {"bar": Style(color="red"), "bar-empty": Style(color="blue"), "threshold": Style(bold=True)}
    new = {"bar": Style(color="green"), "bar-empty": Style(color="blue"), "threshold": Style(bold=True)}
    first = bar.bar_pieces(25, 40, 30, 20, old)
    assert bar.bar_pieces(25, 40, 30, 20, old) is first  # kept
    assert first == bar._bar_pieces(25, 40, 30, 20, old, "bar")
    fresh = bar.bar_pieces(25, 40, 30, 20, new)
    assert fresh == bar._bar_pieces(25, 40, 30, 20, new, "bar")
    assert fresh != first  # the fill is green now


def test_a_full_memo_starts_over() -> None:
    memo, styles = PiecesMemo(size=2), {}
    for key in range(3):
        memo.put(key, styles, [(str(key), Style())])
    assert memo.get(0, styles) is None and memo.get(2, styles) == [("2", Style())]
    assert memo.get(2, {}) is None  # another mapping, however equal
