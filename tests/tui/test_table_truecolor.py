"""The channel table applies the app's ANSI-to-truecolour filter to its own styles, once per style,
instead of Textual making a new segment per segment of every line: the screen must come out exactly as
with Textual's own filtering, whatever the theme, the selected row or a stale (faded) table."""

from __future__ import annotations

from collections.abc import Sequence

import pytest
from textual.filter import LineFilter
from textual.theme import Theme
from textual.widget import Widget

from processing.profile import profile_for
from tests.tui.feeds import SyntheticFeed
from tui.app import PadtuneApp
from tui.session_source import SessionSource
from tui.widgets.channel_table import ChannelTable

NAMES = tuple(f"k{i:02d}" for i in range(12))
# Terminal (ANSI) colours named by a theme. The pinned Textual resolves them (and dim text) before the
# table's styles reach the filter, so the filter leaves them as they are; should that change, this
# theme is where the table's own conversion must still match Textual's.
ANSI_BITS = Theme(name="ansi-bits", primary="ansi_bright_blue", secondary="ansi_magenta", accent="ansi_cyan",
                  warning="ansi_yellow", error="ansi_red", success="ansi_green", foreground="ansi_white",
                  background="#101418", dark=True)


class TextualFiltered(ChannelTable):
    """The table drawn the plain way: Textual styles every line and applies every filter of the app."""

    def get_line_filters(self) -> Sequence[LineFilter]:
        self._own_truecolor(None)
        return Widget.get_line_filters(self)

    def _plain_box(self) -> bool:
        return False


async def screen_text(theme: str, stale: bool, plain: bool, monkeypatch: pytest.MonkeyPatch) -> str:
    text, _ = await drawn(theme, stale, plain, monkeypatch)
    return text


async def drawn(theme: str, stale: bool, plain: bool,
                monkeypatch: pytest.MonkeyPatch) -> tuple[str, tuple[bool, bool]]:
    """The screen's text, and whether the table took its own ways (its truecolour, its plain box)."""
    feed = SyntheticFeed(names=NAMES)
    source = SessionSource(feed, port="test://feed", clock=lambda: feed.t_s, profile=profile_for(len(NAMES)))
    if plain:
        monkeypatch.setattr("tui.screens.live.ChannelTable", TextualFiltered)
    app = PadtuneApp(source, ui_hz=0, clock=lambda: feed.t_s)
    async with app.run_test(size=(120, 40)) as pilot:
        app.register_theme(ANSI_BITS)
        app.theme = theme
        feed.advance(0.5)
        app.refresh_now()
        await pilot.press("down", "down")
        table = app.query_one(ChannelTable)
        assert isinstance(table, TextualFiltered) == plain
        for _ in range(3):  # rows drawn, then drawn again over Textual's kept lines
            feed.advance(0.1)
            app.refresh_now()
            await pilot.pause()
        # After the frames: each screen frame sets the class from the link's state (a live feed: not stale).
        table.set_class(stale, "-stale")
        await pilot.pause()
        assert table.opacity == (0.6 if stale else 1.0)
        return app.export_screenshot(), (table._truecolor is not None, table._plain_box())


@pytest.mark.parametrize("theme", ["textual-dark", "textual-light", "ansi-bits"])
@pytest.mark.parametrize("stale", [False, True])
async def test_rows_in_their_final_styles_draw_as_textual_filtering_them(
        theme: str, stale: bool, monkeypatch: pytest.MonkeyPatch) -> None:
    own = await screen_text(theme, stale, False, monkeypatch)
    plain = await screen_text(theme, stale, True, monkeypatch)
    assert own == plain



@pytest.mark.parametrize("stale", [False, True])
async def test_the_table_takes_its_own_ways_only_where_textual_would_not_change_its_lines(
        stale: bool, monkeypatch: pytest.MonkeyPatch) -> None:
    # Once, `hatch` (None where no rule sets it, not "none") made the table always hand its lines to
    # Textual's filter, so the comparison above compared Textual with itself.
    _, ways = await drawn("textual-dark", stale, False, monkeypatch)
    assert ways == ((False, False) if stale else (True, True))  # a stale table is faded (opacity)
