"""Edit history and setting steps: pure, no screen."""

from __future__ import annotations

import pytest

from processing.settings import ChannelSettings
from tui.edits import Change, EditHistory
from tui.fields import FIELDS, parse_value, refusal, stepped, with_value


def test_undo_redo_walks_back_and_forth() -> None:
    h = EditHistory()
    a, b, c = ChannelSettings(), ChannelSettings(threshold_counts=120), ChannelSettings(threshold_counts=140)
    h.record("one", [Change(0, a, b)])
    h.record("two", [Change(0, b, c), Change(1, a, c)])
    undone = h.undo()  # the edit taken back: its changes' `before` is what to apply
    assert undone is not None and undone.description == "two"
    assert [(x.channel, x.before) for x in undone.changes] == [(0, b), (1, a)]
    assert h.undo().changes[0].before == a
    assert h.undo() is None
    assert h.redo().changes[0].after == b
    h.record("three", [Change(0, b, a)])  # a new edit drops what could have been redone
    assert h.redo() is None


def test_no_op_edits_are_not_recorded() -> None:
    h = EditHistory()
    s = ChannelSettings()
    assert h.record("nothing", [Change(0, s, s)]) is None
    assert not h.can_undo


def test_history_is_bounded() -> None:
    h = EditHistory(limit=3)
    for i in range(10):
        h.record(str(i), [Change(0, ChannelSettings(threshold_counts=100 + i),
                                 ChannelSettings(threshold_counts=101 + i))])
    assert sum(1 for _ in iter(h.undo, None)) == 3


def test_steps_fine_coarse_and_doubling() -> None:
    s = ChannelSettings()
    assert stepped(s, "threshold_counts", 1, False) == 101
    assert stepped(s, "threshold_counts", -1, True) == 90
    assert stepped(s, "baseline_period_frames", 1, False) == 32
    assert stepped(s, "baseline_period_frames", -1, True) == 8
    assert stepped(ChannelSettings(hysteresis_counts=0), "hysteresis_counts", -1, False) == 0


def test_inconsistent_values_are_refused_with_the_reason() -> None:
    s = ChannelSettings(threshold_counts=50, hysteresis_counts=10)
    _, reason = with_value(s, "hysteresis_counts", 50)
    assert reason is not None and "below the threshold" in reason
    _, reason = with_value(s, "threshold_counts", 10)  # threshold down to the hysteresis: same problem
    assert reason is not None and "hysteresis" in reason
    _, reason = with_value(s, "baseline_period_frames", 24)
    assert reason is not None and "power of two" in reason
    _, reason = with_value(s, "touch_debounce_frames", 0)
    assert reason is not None and "between 1" in reason
    assert refusal(s) is None


def test_typed_values() -> None:
    assert parse_value(" 1_000 ", "threshold_counts") == 1000
    assert parse_value("0x20", "threshold_counts") == 32
    with pytest.raises(ValueError, match="whole number of counts"):
        parse_value("12.5", "threshold_counts")


def test_every_setting_is_editable() -> None:
    from dataclasses import fields

    assert {f.key for f in FIELDS} == {f.name for f in fields(ChannelSettings)}
