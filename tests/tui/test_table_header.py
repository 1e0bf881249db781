"""The channel table's header line: built once and kept, yet always what the rows below it need.

The header is kept between screen frames (it was built again at every one); these check that it still
follows scrolling (the arrows in the cursor column), the width and a change of theme.
"""

from __future__ import annotations

from processing.profile import profile_for
from tests.tui.feeds import SyntheticFeed
from tui.app import PadtuneApp
from tui.session_source import SessionSource
from tui.widgets.channel_table import ChannelTable

NAMES = tuple(f"k{i:02d}" for i in range(40))


def make_app() -> tuple[PadtuneApp, SyntheticFeed]:
    feed = SyntheticFeed(names=NAMES)
    source = SessionSource(feed, port="test://feed", clock=lambda: feed.t_s, profile=profile_for(len(NAMES)))
    return PadtuneApp(source, ui_hz=0, clock=lambda: feed.t_s), feed


def header(app: PadtuneApp) -> str:
    return app.query_one(ChannelTable).render_line(0).text


async def test_header_arrows_follow_the_scrolling_and_the_width_follows_the_screen() -> None:
    app, feed = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        feed.advance(0.5)
        app.refresh_now()
        await pilot.pause()
        table = app.query_one(ChannelTable)
        assert header(app).startswith("↓") and "key" in header(app)  # more rows below, none above
        await pilot.press("end")
        await pilot.pause()
        assert header(app).startswith("↑")
        app.query_one(ChannelTable).action_cursor_to(20)
        await pilot.pause()
        assert header(app).startswith("↕")
        assert len(header(app)) == table.size.width == 80
        await pilot.resize_terminal(120, 40)
        feed.advance(0.1)
        app.refresh_now()
        await pilot.pause()
        assert len(header(app)) == app.query_one(ChannelTable).size.width == 120


async def test_header_takes_a_new_theme() -> None:
    app, feed = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        feed.advance(0.5)
        app.refresh_now()
        await pilot.pause()
        table = app.query_one(ChannelTable)
        before = [seg.style for seg in table.render_line(0)]
        app.theme = "textual-light" if app.theme != "textual-light" else "textual-dark"
        await pilot.pause()
        after = [seg.style for seg in table.render_line(0)]
        assert after != before
        assert {style.bgcolor for style in after} == {table.rich_style.bgcolor}  # on the new background
