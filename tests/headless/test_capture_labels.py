"""The capture results speak the trade's words: reason labels, column heads that fit 80 cells, Esc."""

from __future__ import annotations

import numpy as np

from processing.suggest import Suggestion, suggest
from tui.screens.capture import COLUMNS, CaptureScreen, setting_label


def test_every_reason_key_of_a_suggestion_gets_a_plain_label() -> None:
    rng = np.random.default_rng(3)
    quiet = rng.normal(0, 2.0, 200).round()
    held = 90 + rng.normal(0, 2.0, 100).round()
    s = suggest(quiet, held, 50.0)
    assert isinstance(s, Suggestion)
    labels = [setting_label(k) for k in s.reasons]
    assert labels == ["threshold", "hysteresis", "touch debounce", "release debounce"]
    assert setting_label("some_new_key") == "some new key"  # an unknown key still reads as words


def test_column_heads_are_words_and_fit_80_cells() -> None:
    heads = [top for top, _ in COLUMNS]
    assert {"threshold", "hysteresis", "debounce", "applied"} <= set(heads)
    # Widest line of each head plus its one-cell gap, with 5-cell values (e.g. 120.0) where wider;
    # 80 cells less the screen's padding (2) and its scrollbar (1) leave 77.
    widths = [max(len(top), len(unit) + 1, 5) + 1 for top, unit in COLUMNS]
    assert sum(widths) <= 77


def test_discard_key_reads_esc_in_the_footer() -> None:
    discard = next(b for b in CaptureScreen.BINDINGS if b.id == "capture.discard")
    assert discard.key == "escape" and discard.key_display == "Esc"
