"""Times typed in ms or s become whole frames at the board's rate (tui/fields.py), and are shown so.

Reference: the rounding is checked against exact rational arithmetic from Python's stdlib (`fractions`,
`decimal` with ROUND_HALF_UP, which is "half away from zero" for the non-negative values here), worked
independently of the code's own `round_half_away`; the 40 ms / 60 Hz example is worked by hand
(40 ms x 60 /s = 2.4 frames -> 2 frames = 33.3 ms).
"""

from __future__ import annotations

from decimal import ROUND_HALF_UP, Decimal

import pytest
from hypothesis import given
from hypothesis import strategies as st

from processing.settings import ChannelSettings
from tui.editor import Editor, Outcome
from tui.fields import NO_RATE, allowed_range, format_ms, ms_to_frames, parse_time, typed_frames

DEB = "touch_debounce_frames"


def test_the_issue_example_says_the_rounding():
    assert ms_to_frames(40, 60, DEB).note() == "40 ms = 2.4 frames at 60 Hz: 2 frames (33 ms)"


@pytest.mark.parametrize("text", ["40ms", "40 ms", "0.04s", "0.04 s", " 40MS ", "40_0ms"])
def test_spellings_of_a_time(text):
    frames, time = typed_frames(text, DEB, 100.0)
    assert time is not None
    assert frames == (400 * 100 // 1000 if "_" in text else 4)


def test_plain_numbers_stay_frames_and_hex_is_not_seconds():
    assert typed_frames("7", DEB, 60.0) == (7, None)
    assert typed_frames("0x10", DEB, 60.0) == (16, None)


@pytest.mark.parametrize(("text", "rate", "frames"), [
    # 1 Hz: a frame is a second; half a frame goes up (away from zero), just under half goes down
    ("499ms", 1.0, 0), ("500ms", 1.0, 1), ("1499ms", 1.0, 1), ("1500ms", 1.0, 2), ("2.5s", 1.0, 3),
    # 1 kHz: a frame is a millisecond
    ("0.4ms", 1000.0, 0), ("0.5ms", 1000.0, 1), ("0.0025s", 1000.0, 3), ("40ms", 1000.0, 40),
    ("2.4995ms", 1000.0, 2),
])
def test_rounding_at_the_edges(text, rate, frames):
    assert typed_frames(text, DEB, rate)[0] == frames


@given(ms=st.decimals(min_value=0, max_value=100_000, places=3),
       rate=st.sampled_from([1.0, 7.0, 50.0, 60.0, 100.0, 1000.0, 1234.0]))
def test_rounding_matches_decimal_half_up(ms, rate):
    expected = int((ms * Decimal(str(rate)) / 1000).quantize(Decimal(1), rounding=ROUND_HALF_UP))
    assert typed_frames(f"{ms}ms", DEB, rate)[0] == expected


def test_the_baseline_period_rounds_to_the_nearest_power_of_two_by_ratio():
    key = "baseline_period_frames"
    assert typed_frames("40ms", key, 1000.0)[0] == 32  # 40 frames: log2 5.32 -> 2^5
    assert typed_frames("48ms", key, 1000.0)[0] == 64  # 48 frames: log2 5.58 -> 2^6
    assert typed_frames("0.1ms", key, 1000.0)[0] == 1


def test_without_a_rate_ms_cannot_be_used_yet_in_one_line():
    with pytest.raises(ValueError) as err:
        typed_frames("40ms", DEB, None)
    assert str(err.value) == NO_RATE and "\n" not in NO_RATE


@pytest.mark.parametrize("text", ["ms", "4x0ms", "-5ms", "1e999999ms", "nan ms"])
def test_bad_times_are_one_clear_line(text):
    with pytest.raises(ValueError) as err:
        typed_frames(text, DEB, 60.0)
    assert "\n" not in str(err.value)
    assert parse_time("abc") is None


def test_the_allowed_range_in_both_units():
    s = ChannelSettings()
    assert allowed_range(s, DEB, 60.0).endswith("frames (17 ms … 4250 ms at 60 Hz)")
    assert "ms" not in allowed_range(s, DEB, None)
    assert "ms" not in allowed_range(s, "threshold_counts", 60.0)


def test_format_ms_units():
    assert [format_ms(x) for x in (33.3, 9999, 12_000, 90_000, 3_600_000, 36_000_000)] == \
        ["33 ms", "9999 ms", "12 s", "90 s", "60 min", "10 h"]


class _Target:
    def __init__(self) -> None:
        self.s = ChannelSettings()

    def channel_names(self): return ["zone1"]
    def settings(self, channel): return self.s
    def apply(self, channel, settings): self.s = settings
    def polarity(self, channel): return 1
    def set_polarity(self, channel, sign): pass
    def group_of(self, channel): return [channel]


def test_the_editor_applies_a_time_and_says_the_rounding():
    ed = Editor(_Target())
    result = ed.type_value(0, DEB, "40 ms", 60.0)
    assert result.outcome is Outcome.APPLIED
    assert result.message.endswith("→ 2 (40 ms = 2.4 frames at 60 Hz: 2 frames (33 ms))")
    assert ed.rounding(DEB, "40ms", 60.0) == "40 ms = 2.4 frames at 60 Hz: 2 frames (33 ms)"
    assert ed.rounding(DEB, "4", 60.0) == ""
    refused = ed.type_value(0, DEB, "1ms", 60.0)  # 0.06 frames -> 0: below the least debounce
    assert refused.outcome is Outcome.REFUSED and "0 frames" in refused.message
    assert ed.check_text(0, DEB, "40ms", None) == NO_RATE
    assert ed.type_value(0, DEB, "40ms", None).outcome is Outcome.REFUSED
