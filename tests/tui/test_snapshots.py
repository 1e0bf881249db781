"""SVG snapshots of the live screen at 80x24 and 120x40: main view, detail panel, help.

The data is a seeded simulated greenhouse board decoded by the real decoder, with the clock moved by
the test (no timer, no wall time), so every run draws the same screen. Approve changes with
`make snapshots-update` only after looking at the new SVGs.
"""

from __future__ import annotations

import pytest

from tests.tui.feeds import SimFeed
from tui.app import PadtuneApp
from tui.demo_profile import demo_profile
from tui.session_source import SessionSource

SIZES = [(80, 24), (120, 40)]


def demo_app() -> PadtuneApp:
    feed = SimFeed(seed=11)
    source = SessionSource(feed, port="sim://greenhouse?seed=11", profile=demo_profile("greenhouse"),
                           clock=lambda: feed.t_s)
    app = PadtuneApp(source, ui_hz=0, clock=lambda: feed.t_s, demo=True)

    def advance(seconds: float) -> None:
        for _ in range(round(seconds / feed.step_s)):
            feed.advance(feed.step_s)
            app.refresh_now()

    app.advance = advance  # type: ignore[attr-defined]
    return app


async def settle(pilot) -> None:
    app = pilot.app
    app.advance(3.0)
    app.source.press(1, True)  # zone2 held, and the slider touched near its second pad
    app.source.press(6, True)
    app.advance(1.0)
    await pilot.pause()


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_main_screen(snap_compare, size) -> None:
    assert snap_compare(demo_app(), terminal_size=size, run_before=settle)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_detail_panel(snap_compare, size) -> None:
    async def before(pilot) -> None:
        await settle(pilot)
        await pilot.press("down", "d")
        pilot.app.advance(0.2)
        await pilot.pause()

    assert snap_compare(demo_app(), terminal_size=size, run_before=before)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_help_screen(snap_compare, size) -> None:
    async def before(pilot) -> None:
        await settle(pilot)
        await pilot.press("question_mark")
        await pilot.pause()

    assert snap_compare(demo_app(), terminal_size=size, run_before=before)


def first_contact_app() -> PadtuneApp:
    """No profile, a board that does not say which way its counts move: after its quiet second, zone2
    has been touched once (its lesson: counts fall) and the others still wait for theirs."""
    from tests.tui.feeds import SyntheticFeed

    feed = SyntheticFeed(polarity=(), seed=5)
    source = SessionSource(feed, port="/dev/ttyACM0", clock=lambda: feed.t_s)
    app = PadtuneApp(source, ui_hz=0, clock=lambda: feed.t_s)

    def advance(seconds: float) -> None:
        for _ in range(round(seconds / 0.05)):
            feed.advance(0.05)
            app.refresh_now()

    def lesson() -> None:
        advance(1.5)
        feed.set_touch(1, -150)
        advance(0.4)
        feed.set_touch(1, 0)
        advance(0.5)

    app.advance, app.lesson = advance, lesson  # type: ignore[attr-defined]
    return app


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_first_contact_screen(snap_compare, size) -> None:
    async def before(pilot) -> None:
        pilot.app.lesson()
        await pilot.press("down")
        await pilot.pause()

    assert snap_compare(first_contact_app(), terminal_size=size, run_before=before)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_value_dialog(snap_compare, size) -> None:
    """The value dialog names the setting, its unit and the values it may take."""
    async def before(pilot) -> None:
        await settle(pilot)
        await pilot.press("down", "enter")
        await pilot.pause()

    assert snap_compare(demo_app(), terminal_size=size, run_before=before)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_quit_dialog(snap_compare, size) -> None:
    async def before(pilot) -> None:
        await settle(pilot)
        await pilot.press("plus", "q")
        await pilot.pause()

    assert snap_compare(demo_app(), terminal_size=size, run_before=before)


LONG_PORT = "/dev/serial/by-id/usb-Greenhouse_Controls_Irrigation_Touch_Bridge_0123456789ABCDEF-if00-port0"


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_long_port_path(snap_compare, size, tmp_path) -> None:
    """A 90-character by-id path, an unsaved edit and a recording: the path gives way, in the middle."""
    feed = SimFeed(seed=11)
    source = SessionSource(feed, port=LONG_PORT, profile=demo_profile("greenhouse"), clock=lambda: feed.t_s,
                           simulated=True)
    app = PadtuneApp(source, ui_hz=0, clock=lambda: feed.t_s, demo=True)

    async def before(pilot) -> None:
        for _ in range(40):
            feed.advance(feed.step_s)
            app.refresh_now()
        await pilot.press("plus")
        source.start_recording(tmp_path / "pump-house-morning-run.csv")
        for _ in range(40):
            feed.advance(feed.step_s)
            app.refresh_now()
        await pilot.pause()

    assert snap_compare(app, terminal_size=size, run_before=before)


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_measuring_noise(snap_compare, size) -> None:
    """No profile, the first half second: no key has a threshold yet, and the screen says so."""
    async def before(pilot) -> None:
        pilot.app.advance(0.5)
        await pilot.press("d")
        pilot.app.advance(0.1)
        await pilot.pause()

    assert snap_compare(first_contact_app(), terminal_size=size, run_before=before)
