"""Times in ms on the live screen, and the detail panel's long view (z / Z), through the pilot and SVG
snapshots at 80x24 and 120x40 (the seeded greenhouse board of `test_snapshots.py`, its clock moved by
the test). Approve snapshot changes only after looking at the SVGs.
"""

from __future__ import annotations

import pytest

from tests.tui.feeds import screen_text
from tests.tui.test_snapshots import SIZES, demo_app, settle
from tui.render.views import span_words, time_unit
from tui.widgets.detail_panel import ZOOM_LEVELS


def run_session(app, seconds: float, tap_at_s: float | None = None) -> None:
    """`seconds` of the board through the source's poll (as the screen's timer would, without drawing
    every frame: ten minutes of a board stay a second or two of test); a tap of zone2 at `tap_at_s`."""
    src, feed = app.source, app.source.producer
    step = 0.25
    for i in range(round(seconds / step)):
        t = i * step
        if tap_at_s is not None and t == tap_at_s:
            src.press(1, True)
        if tap_at_s is not None and t == tap_at_s + 0.5:
            src.press(1, False)
        feed.advance(step)
        src.poll()
    app.refresh_now()


def long_app(presses: tuple[str, ...]):
    app = demo_app()

    async def before(pilot) -> None:
        await settle(pilot)
        pilot.app.source.press(1, False)
        pilot.app.source.press(6, False)
        run_session(pilot.app, 600.0, tap_at_s=300.0)
        await pilot.press("down", "d", *presses)
        pilot.app.advance(0.1)
        await pilot.pause()

    return app, before


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_detail_panel_zoomed_out_to_the_session(snap_compare, size) -> None:
    app, before = long_app(("z",) * (len(ZOOM_LEVELS) - 1))
    assert snap_compare(app, terminal_size=size, run_before=before)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_edit_bar_with_ms(snap_compare, size) -> None:
    async def before(pilot) -> None:
        await settle(pilot)
        await pilot.press("right", "right", "d")  # touch debounce, the detail panel open
        pilot.app.advance(0.1)
        await pilot.pause()

    assert snap_compare(demo_app(), terminal_size=size, run_before=before)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_value_dialog_says_the_rounding(snap_compare, size) -> None:
    async def before(pilot) -> None:
        await settle(pilot)
        await pilot.press("right", "right", "enter", "ctrl+a", "ctrl+k", *"40ms")
        await pilot.pause()

    assert snap_compare(demo_app(), terminal_size=size, run_before=before)


async def test_zoom_keys_walk_the_levels_and_stop_at_both_ends() -> None:
    app, before = long_app(())
    async with app.run_test(size=(120, 40)) as pilot:
        await before(pilot)
        panel = app.screen.detail_panel
        assert panel.zoom == 0 and "reading ⣿" in screen_text(app)
        for level in range(1, len(ZOOM_LEVELS) + 2):
            await pilot.press("z")
            assert panel.zoom == min(level, len(ZOOM_LEVELS) - 1)
        text = screen_text(app)
        assert "whole session, 10 min · baseline drift" in text
        assert "minutes (0 = now" in text
        await pilot.press("Z", "Z", "Z", "Z", "Z", "Z")
        assert panel.zoom == 0
        await pilot.press("z", "f")  # the spectrum over a zoomed panel; z again brings the plot back
        await pilot.press("z")
        assert not app.screen.spectrum and panel.zoom == 2
        await pilot.press("d", "z")  # with the panel closed the keys are not its: nothing happens
        assert panel.zoom == 2 and not app.screen.detail


async def test_help_lists_the_zoom_keys_and_times_in_ms() -> None:
    app = demo_app()
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(pilot)
        await pilot.press("question_mark")
        await pilot.pause()
        text = screen_text(app)
        assert "zoom out to 1 min" in text and "40ms" in text


async def test_a_time_typed_in_the_dialog_becomes_frames_and_the_log_says_the_rounding() -> None:
    app = demo_app()
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(pilot)
        await pilot.press("right", "right", "enter", "ctrl+a", "ctrl+k", *"60 ms")
        await pilot.pause()
        assert "60 ms = 3.6 frames at 60 Hz: 4 frames (67 ms)" in screen_text(app)
        await pilot.press("enter")
        await pilot.pause()
        assert app.source.settings(0).touch_debounce_frames == 4
        logged = " ".join(screen_text(app).split())  # the log wraps its lines
        assert "touch debounce 2 → 4 (60 ms = 3.6 frames at 60 Hz: 4 frames (67 ms))" in logged


def test_time_axis_units_and_words() -> None:
    assert [time_unit(s)[0] for s in (8, 120, 121, 7200, 7201)] == ["s", "s", "min", "min", "h"]
    assert [span_words(s) for s in (45, 600, 5400, 36000)] == ["45 s", "10 min", "90 min", "10 h"]


async def test_without_a_known_rate_the_dialog_says_ms_cannot_be_used_yet(monkeypatch) -> None:
    from tui.fields import NO_RATE
    from tui.session_source import SessionSource

    monkeypatch.setattr(SessionSource, "known_rate_hz", property(lambda self: None))
    app = demo_app()
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(pilot)
        await pilot.press("right", "right", "enter")
        await pilot.pause()
        assert NO_RATE.startswith("ms cannot be used yet")
        assert screen_text(app).count("ms cannot be used yet") == 1  # the hint (the dialog wraps it)
        await pilot.press("ctrl+a", "ctrl+k", *"40ms", "enter")
        await pilot.pause()
        assert "✗ ms cannot be used yet" in screen_text(app)
        assert app.source.settings(0).touch_debounce_frames == 2  # nothing changed, the dialog stays


def test_the_source_knows_the_rate_only_once_stated_or_measured() -> None:
    app = demo_app()
    assert app.source.known_rate_hz is None  # no frames yet
    app.source.producer.advance(1.0)
    app.source.poll()
    assert app.source.known_rate_hz == 60.0  # the greenhouse board states 60 Hz
