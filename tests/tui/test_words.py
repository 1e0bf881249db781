"""Wording rules (counts agree in number, names cut in the middle) and the link strip that uses them."""

from __future__ import annotations

import pytest

from tui.render.link import link_strip
from tui.render.views import LinkView
from tui.words import middle, plural, with_unit

BY_ID = "/dev/serial/by-id/usb-Greenhouse_Controls_Irrigation_Touch_Bridge_0123456789ABCDEF-if00-port0"


def test_counts_agree_in_number() -> None:
    assert [plural(n, "frame") for n in (0, 1, 2, -1)] == ["0 frames", "1 frame", "2 frames", "-1 frame"]
    assert plural(1, "key") == "1 key" and plural(3, "channel") == "3 channels"
    assert with_unit(1, "counts") == "1 count" and with_unit(15, "counts") == "15 counts"
    assert with_unit(1, "frames") == "1 frame" and with_unit(1, "ms") == "1 ms" and with_unit(4, "") == "4"


def test_middle_keeps_both_ends() -> None:
    assert middle("short", 10) == "short"
    cut = middle(BY_ID, 30)
    assert len(cut) == 30 and cut.startswith("/dev/serial/by") and cut.endswith("-if00-port0") and "…" in cut
    assert middle("abcdef", 1) == "…" and middle("abcdef", 0) == ""


def view(**changes: object) -> LinkView:
    base = dict(port=BY_ID, baud=115200, state="connected", fps=100.0, garbled=3,
                profile_name="greenhouse.toml", unsaved=True,
                recording="/home/grower/recordings/pump-house-morning-run-with-the-doors-open.csv")
    base.update(changes)
    return LinkView(**base)  # type: ignore[arg-type]


@pytest.mark.parametrize("width", [60, 78, 100, 138])
def test_the_compact_strip_fits_and_keeps_rates_errors_unsaved_and_recording(width: int) -> None:
    for v in (view(), view(state="reconnecting", detail="device went away: waiting for it to come back at "
                           + BY_ID), view(recording=None, recording_error="write failed (No space left on "
                                           "device); stopped"), view(paused=True, saving=True)):
        first, second = link_strip(v, {}, compact=True, width=width).plain.split("\n")
        assert len(first) <= width and len(second) <= width, (first, second)
        assert "115200 Bd" in first and "100 fps" in first
        assert (BY_ID in first) == (width >= 120 and v.state == "connected" and not v.paused), first
        if BY_ID not in first and width >= 78:  # (narrower, the name may be cut to a few cells)
            assert BY_ID[:5] in first and BY_ID[-5:] in first and "…" in first
        assert "garbled 3" in second and "*unsaved" in second
        assert ("⏺ REC " in second) or ("✗ REC FAILED (disk full)" in second)
        if v.paused:
            assert "DISPLAY PAUSED" in first and "saving…" in second
        if v.state == "reconnecting":
            assert "RECONNECTING" in first


def test_the_wide_strip_is_one_line_that_fits() -> None:
    text = link_strip(view(board="greenhouse-panel-rev-c"), {}, compact=False, width=150).plain
    assert "\n" not in text and len(text) <= 150
    assert "100 fps" in text and "*unsaved" in text and "⏺ REC" in text and "garbled 3" in text


def test_a_short_port_is_never_cut() -> None:
    text = link_strip(view(port="/dev/ttyACM0", recording=None), {}, compact=True, width=80).plain
    assert "/dev/ttyACM0 115200 Bd" in text and "…" not in text
