"""The editor as a plain object: every call says what happened, without a screen or a pilot.

The target is a small fake with the same refusals as the engine (`ChannelSettings.check()`), plus a
channel that refuses everything, to see a batch taken back whole.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace

import numpy as np
import pytest

from processing.provisional import QuietStats, provisional_settings
from processing.settings import MAX_COUNTS, ChannelSettings
from tui.editor import Editor, Outcome
from tui.fields import FIELDS, FROM_NOISE, LARGEST, allowed_range, with_value


class Board:
    """Five channels, zone1..zone4 in a group, `stop` alone; `broken` channels refuse any change."""

    def __init__(self, channels: int = 5) -> None:
        self.names = ["zone1", "zone2", "zone3", "zone4", "stop"][:channels]
        self.values = [ChannelSettings() for _ in self.names]
        self.signs: list[int | None] = [1] * channels
        self.broken: set[int] = set()

    def channel_names(self) -> list[str]:
        return list(self.names)

    def settings(self, channel: int) -> ChannelSettings:
        return self.values[channel]

    def apply(self, channel: int, settings: ChannelSettings) -> None:
        if channel in self.broken:
            raise ValueError(f"channel {channel} is gone")
        settings.check()  # what the engine refuses
        self.values[channel] = settings

    def polarity(self, channel: int) -> int | None:
        return self.signs[channel]

    def set_polarity(self, channel: int, sign: int | None) -> None:
        if channel in self.broken:
            raise ValueError(f"channel {channel} is gone")
        self.signs[channel] = sign

    def group_of(self, channel: int) -> Sequence[int]:
        return [0, 1, 2, 3] if channel < 4 else [channel]


def test_steps_apply_and_read_as_what_changed() -> None:
    board = Board()
    ed = Editor(board)
    r = ed.step(0, "threshold_counts", 1)
    assert r.outcome is Outcome.APPLIED and r.message == "zone1: threshold 100 → 101"
    assert ed.step(0, "threshold_counts", -1, coarse=True).message == "zone1: threshold 101 → 91"
    assert ed.step(0, "baseline_period_frames", 1).message == "zone1: baseline period 16 → 32"
    assert board.values[0].threshold_counts == 91 and board.values[0].baseline_period_frames == 32


def test_refusals_say_why_with_the_engines_words_and_change_nothing() -> None:
    board = Board()
    ed = Editor(board)
    before = board.values[0]
    r = ed.set_value(0, "hysteresis_counts", 100)
    assert r.outcome is Outcome.REFUSED
    assert r.message == ("Refused: hysteresis 100 must be below the threshold (100), or the key could never "
                         "release. It stays 15 counts.")
    r = ed.set_value(0, "touch_debounce_frames", 0)
    assert r.outcome is Outcome.REFUSED and r.message.endswith("It stays 3 frames.")
    typed = ed.type_value(0, "threshold_counts", "12.5")
    assert typed.message.startswith("Refused: threshold must be a whole")
    assert board.values[0] == before and not ed.history.can_undo
    assert ed.check_text(0, "threshold_counts", "10") is not None  # below the hysteresis
    assert ed.check_text(0, "threshold_counts", "0x20") is None
    assert ed.check_text(0, "polarity", "sideways") is not None and ed.check_text(0, "polarity", "?") is None


def test_one_frame_reads_as_one_frame() -> None:
    board = Board()
    board.values[0] = replace(board.values[0], touch_debounce_frames=1)
    r = Editor(board).set_value(0, "touch_debounce_frames", 0)
    assert r.message.endswith("It stays 1 frame.")


def test_nothing_to_do_and_no_board_are_not_edits() -> None:
    ed = Editor(Board(channels=0))
    assert ed.step(0, "threshold_counts", 1).outcome is Outcome.UNAVAILABLE
    assert ed.copy_to_all(0).message.startswith("No channels yet")
    board = Board()
    ed = Editor(board)
    assert ed.set_value(0, "threshold_counts", 100).outcome is Outcome.UNCHANGED
    assert ed.copy_to_all(0).message == "All channels: already the same settings."
    assert ed.copy_to_group(4).outcome is Outcome.UNAVAILABLE
    assert ed.undo().message == "Nothing to undo." and ed.redo().message == "Nothing to redo."
    assert not ed.history.can_undo


def test_copies_count_the_channels_they_changed_and_undo_as_one_step() -> None:
    board = Board()
    ed = Editor(board)
    board.values[2] = ChannelSettings(threshold_counts=120)
    ed.step(2, "threshold_counts", 1)
    r = ed.copy_to_group(2)
    assert r.message == "copied zone3's settings to its group (3 channels changed)"
    board.values[4] = ChannelSettings(threshold_counts=121)  # stop happens to match already
    assert ed.copy_to_all(2).outcome is Outcome.UNCHANGED
    board.values[4] = ChannelSettings()
    assert ed.copy_to_all(2).message == "copied zone3's settings to all channels (1 channel changed)"
    undone = ed.undo()
    assert undone.message == "undid copied zone3's settings to all channels (1 channel changed)"
    assert board.values[4] == ChannelSettings()
    ed.undo()
    assert [v.threshold_counts for v in board.values] == [100, 100, 121, 100, 100]


def test_a_batch_refused_half_way_is_taken_back_whole() -> None:
    board = Board()
    board.broken = {3}
    ed = Editor(board)
    ed.step(0, "threshold_counts", 5)
    r = ed.copy_to_group(0)
    assert r.outcome is Outcome.REFUSED and "channel 3 is gone" in r.message
    assert [v.threshold_counts for v in board.values] == [105, 100, 100, 100, 100]
    assert ed.undo().message == "undid zone1: threshold 100 → 105 (threshold 100 again)"


def test_undo_and_redo_say_what_they_undid() -> None:
    board = Board()
    ed = Editor(board)
    ed.set_value(1, "threshold_counts", 40)
    ed.set_value(1, "threshold_counts", 30)
    assert ed.undo().message == "undid zone2: threshold 40 → 30 (threshold 40 again)"
    assert board.values[1].threshold_counts == 40
    assert ed.redo().message == "redid zone2: threshold 40 → 30"
    assert board.values[1].threshold_counts == 30
    ed.undo()
    ed.set_value(1, "hysteresis_counts", 5)  # a new edit: what could have been redone is gone
    assert ed.redo().outcome is Outcome.UNCHANGED


def test_polarity_edits_go_through_the_same_history() -> None:
    board = Board()
    ed = Editor(board)
    r = ed.step(1, "polarity", -1)
    assert r.message == "zone2: polarity + → -" and board.signs[1] == -1
    assert ed.set_polarity(1, -1).outcome is Outcome.UNCHANGED
    assert ed.type_value(1, "polarity", "?").message == "zone2: polarity - → ?"
    assert board.signs[1] is None
    assert ed.undo().message == "undid zone2: polarity - → ? (polarity - again)"
    assert board.signs[1] == -1
    assert ed.allowed(1, "polarity").startswith("+ (counts rise on touch)")


def test_the_guided_capture_outcome_is_one_edit_polarities_first() -> None:
    board = Board()
    board.signs = [None] * 5
    ed = Editor(board)
    tuned = {0: ChannelSettings(threshold_counts=40, hysteresis_counts=12),
             2: ChannelSettings(threshold_counts=55, hysteresis_counts=15)}
    r = ed.apply_batch("guided capture: zone1, zone3", tuned, {0: -1, 2: 1})
    assert r.applied and [c.channel for c in r.edit.changes] == [0, 2, 0, 2]
    assert board.signs[:3] == [-1, None, 1] and board.values[2].threshold_counts == 55
    assert ed.undo().message == "undid guided capture: zone1, zone3"
    assert board.signs == [None] * 5 and board.values[0] == ChannelSettings()
    assert ed.apply_batch("guided capture", {7: ChannelSettings()}).outcome is Outcome.REFUSED
    board.broken = {2}
    assert ed.apply_batch("guided capture", tuned, {0: -1}).outcome is Outcome.REFUSED
    assert board.signs[0] is None and board.values[0] == ChannelSettings()  # nothing half done


def test_a_board_that_changed_under_the_history_clears_it_with_the_reason() -> None:
    board = Board()
    ed = Editor(board)
    ed.step(3, "threshold_counts", 1)
    board.broken = {3}
    r = ed.undo()
    assert r.outcome is Outcome.REFUSED and r.message == ("Cannot undo: channel 3 is gone. The edit history "
                                                         "was cleared.")
    assert not ed.history.can_undo and not ed.history.can_redo
    assert not ed.forget()


def test_the_allowed_range_is_what_the_refusals_allow() -> None:
    # The range is found by bisection; checked here against every value, one by one, near its ends.
    s = ChannelSettings(threshold_counts=40, hysteresis_counts=12, baseline_slow_shift=5,
                        baseline_fast_shift=3)
    assert allowed_range(s, "threshold_counts") == f"13 … {MAX_COUNTS} counts"
    assert allowed_range(s, "hysteresis_counts") == "0 … 39 counts"
    assert allowed_range(s, "baseline_slow_shift") == "3 … 16"
    assert allowed_range(s, "baseline_fast_shift") == "0 … 5"
    assert allowed_range(s, "stuck_timeout_frames") == f"0 (never) … {LARGEST} frames"
    assert allowed_range(s, "baseline_period_frames") == "1, 2, 4 … 256 frames (powers of two)"
    for f in FIELDS:
        if f.doubling:
            continue
        shown = allowed_range(s, f.key).split(" … ")
        low = int(shown[0].split()[0])
        high = int(shown[1].split()[0])
        fine = [v for v in range(0, min(high, 400) + 3) if with_value(s, f.key, v)[1] is None]
        assert fine[0] == low and (high > 400 or fine[-1] == high), f.key
        assert fine == list(range(low, min(high, 400 + 2) + 1)), f.key  # one interval, no holes
    assert allowed_range(ChannelSettings(hysteresis_counts=200), "threshold_counts") == ""  # refused already


def test_the_settings_taken_from_the_noise_are_the_ones_the_screen_hides_while_measuring() -> None:
    stats = QuietStats.of(np.array([1000, 1004, 998, 1003] * 25), np.linspace(0, 1, 100))
    changed = {f.key for f in FIELDS
               if getattr(provisional_settings(stats, 250.0), f.key) != getattr(ChannelSettings(), f.key)}
    assert changed == FROM_NOISE


@pytest.mark.parametrize("text", ["", "  ", "abc"])
def test_typed_garbage_is_refused_not_raised(text: str) -> None:
    r = Editor(Board()).type_value(0, "threshold_counts", text)
    assert r.outcome is Outcome.REFUSED and "whole number" in r.message
