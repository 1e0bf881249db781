"""The live screen on a board met with no profile and no stated polarity, through Textual's pilot:
the table's `≈` and `~ noise` / `? learn`, the edit bar's status and polarity field, a polarity edit
through the undo history, and what counts as unsaved."""

from __future__ import annotations

from pathlib import Path

from processing.profile import load_profile
from tests.tui.feeds import SyntheticFeed, log_text, screen_text
from tests.tui.test_app_actions import run, type_into_prompt
from tui.app import PadtuneApp
from tui.session_source import SessionSource


def bare_app() -> tuple[PadtuneApp, SyntheticFeed]:
    """No profile, and a board that does not say which way its counts move."""
    feed = SyntheticFeed(polarity=())
    source = SessionSource(feed, port="test://feed", clock=lambda: feed.t_s)
    return PadtuneApp(source, ui_hz=0, clock=lambda: feed.t_s), feed


def rows(app: PadtuneApp) -> list[str]:
    return [line for line in screen_text(app).splitlines() if "zone" in line or "stop" in line][:5]


def edit_bar_text(app: PadtuneApp) -> str:
    return str(app.query_one("#edit-bar").render())


async def test_the_table_says_measuring_then_learning_then_the_lesson() -> None:
    app, feed = bare_app()
    async with app.run_test(size=(170, 30)) as pilot:  # wide enough for the whole edit bar
        run(app, feed, 0.5)
        assert all("~ noise" in r and "≈" in r for r in rows(app)), rows(app)
        assert edit_bar_text(app).startswith("zone1 1/5 measuring noise ")
        run(app, feed, 1.0)
        assert all("? learn" in r and "≈" in r for r in rows(app)), rows(app)
        bar = edit_bar_text(app)
        assert bar.startswith("zone1 1/5 provisional ▸threshold ") and "polarity ? learning" in bar
        feed.set_touch(1, -150)  # zone2's counts fall on its first touch ...
        run(app, feed, 0.4)
        assert "TOUCH" not in screen_text(app)  # ... which is the lesson, not a touch
        feed.set_touch(1, 0)
        run(app, feed, 0.3)
        assert "zone2: counts fall on touch: polarity -" in log_text(app)
        zone2 = rows(app)[1]
        assert "idle" in zone2 and "≈" in zone2
        await pilot.press("down", "left")  # zone2, and from threshold leftwards to the polarity field
        assert "▸polarity - (counts fall on touch)" in edit_bar_text(app)
        feed.set_touch(1, -150)
        run(app, feed, 0.3)
        assert "● TOUCH" in rows(app)[1]
        assert not app.source.unsaved()  # provisional settings and a learned polarity are no edits


async def test_the_polarity_field_sets_it_and_undo_takes_it_back() -> None:
    app, feed = bare_app()
    async with app.run_test(size=(100, 30)) as pilot:
        run(app, feed, 1.5)
        await pilot.press("left")  # the polarity field, the last one
        assert app.live.field_key == "polarity"
        await pilot.press("minus")
        session = app.source.session  # type: ignore[attr-defined]
        assert session.polarity[0] == -1 and session.phase(0) == "ready"
        assert "zone1: polarity ? → -" in log_text(app)
        assert "? learn" not in rows(app)[0]
        await pilot.press("u")
        assert session.polarity[0] is None and session.phase(0) == "measuring"  # learning it again
        assert "undid zone1: polarity ? → - (polarity ? again)" in log_text(app)
        await pilot.press("U")
        assert session.polarity[0] == -1
        assert "redid zone1: polarity ? → -" in log_text(app)
        await pilot.press("plus")  # the other way round: one more edit
        assert session.polarity[0] == 1 and "zone1: polarity - → +" in log_text(app)
        await pilot.press("enter")
        await type_into_prompt(pilot, "x")  # refused in the prompt, with the reason
        assert "polarity must be +" in str(app.screen.query_one("#prompt-error").render())
        await pilot.press("ctrl+a", "ctrl+k", "question_mark", "enter")
        await pilot.pause()
        assert session.polarity[0] is None
        await pilot.press("u", "u")
        assert session.polarity[0] == -1


async def test_an_edit_ends_provisional_for_its_channel_and_an_undo_brings_it_back() -> None:
    app, feed = bare_app()
    async with app.run_test(size=(100, 30)) as pilot:
        run(app, feed, 1.5)
        await pilot.press("plus")  # threshold one up on zone1
        run(app, feed, 0.1)
        assert "≈" not in rows(app)[0] and "≈" in rows(app)[1]
        assert not edit_bar_text(app).startswith("zone1 1/5 provisional")
        await pilot.press("u")
        run(app, feed, 0.1)
        assert "≈" in rows(app)[0] and edit_bar_text(app).startswith("zone1 1/5 provisional")


async def test_saving_writes_the_polarity_once_every_channel_has_one(tmp_path: Path) -> None:
    app, feed = bare_app()
    async with app.run_test(size=(100, 30)) as pilot:
        run(app, feed, 1.5)
        await pilot.press("left")
        for _ in range(5):  # set every channel's polarity from the keyboard: + everywhere ...
            await pilot.press("plus", "down")
        await pilot.press("minus")  # ... but stop (the cursor stays on the last), whose counts fall
        assert app.source.unsaved()  # a profile can hold the polarity now that every channel has one
        await pilot.press("s")
        await type_into_prompt(pilot, str(tmp_path / "keys.toml"))
        saved = load_profile(tmp_path / "keys.toml")
        assert saved.polarity == (1, 1, 1, 1, -1)
        assert saved.settings_for(0).threshold_counts == app.source.settings(0).threshold_counts
        assert not app.source.unsaved()
