"""Settings that travel (PROTOCOL.md section 7) on the live screen, through Textual's pilot.

The board is a seeded simulated greenhouse panel that says settings=1, decoded by the real decoder; its
answers come back through the feed like any event, and the screen's timer is off (`refresh_now()` after
each step of the test's clock), so nothing waits on threads or wall time.
"""

from __future__ import annotations

from dataclasses import replace

from protocol.commands import parse_command
from protocol.encoder import encode_answer
from tests.tui.feeds import SimFeed, log_text, screen_text
from tui.app import PadtuneApp
from tui.demo_profile import DEMO_SETTINGS, demo_profile
from tui.render.settings import edit_bar
from tui.screens.board_diff import BoardDiffScreen
from tui.session_source import SessionSource
from tui.widgets.edit_bar import EditBar


class NarrowBoardFeed(SimFeed):
    """A board (think of firmware with 8-bit thresholds) that refuses thresholds above 35 counts."""

    def write(self, data: bytes) -> bool:
        for line in data.splitlines():
            command = parse_command(line)
            if command and command.word == "set":
                pairs = dict(a.split("=", 1) for a in command.args[1:] if "=" in a)
                value = pairs.get("threshold_counts", "0")
                if value.isdigit() and int(value) > 35:
                    self.board._pending += encode_answer(
                        f">no {command.subject}: threshold_counts: this board takes at most 35")
                    continue
            self.board.write(line + b"\n")
        return True


class DeafBoardFeed(SimFeed):
    """A board that says settings=1 and then never answers a command."""

    def write(self, data: bytes) -> bool:
        return True


def travel_app(feed: SimFeed | None = None, profile=None) -> tuple[PadtuneApp, SimFeed, SessionSource]:
    feed = feed or SimFeed(seed=11, settings=True)
    source = SessionSource(feed, port="sim://greenhouse?seed=11",
                           profile=profile or demo_profile("greenhouse"), clock=lambda: feed.t_s)
    return PadtuneApp(source, ui_hz=0, clock=lambda: feed.t_s, demo=True), feed, source


def run(app: PadtuneApp, feed: SimFeed, seconds: float) -> None:
    for _ in range(max(1, round(seconds / feed.step_s))):
        feed.advance(feed.step_s)
        app.refresh_now()


def board_threshold(feed: SimFeed, channel: int) -> int:
    return feed.board.settings.live[channel]["threshold_counts"]


def bar(app: PadtuneApp) -> str:
    return str(app.query_one(EditBar).render())


async def test_each_edit_undo_redo_and_copy_reaches_the_board_and_the_bar_says_applied() -> None:
    app, feed, source = travel_app()
    async with app.run_test(size=(100, 30)) as pilot:
        run(app, feed, 1.0)
        assert source.board_sync.active and source.board_sync.read_count == 1
        assert "the board holds the session's settings" in log_text(app)
        await pilot.press("plus")
        run(app, feed, 0.2)
        assert board_threshold(feed, 0) == 31
        assert "✓ on board" in bar(app) and "threshold 31 counts ✓ on board" in bar(app)
        await pilot.press("u")
        run(app, feed, 0.2)
        assert board_threshold(feed, 0) == 30
        await pilot.press("U", "a")  # redo, then copy zone1's settings to every channel
        run(app, feed, 0.5)
        assert [s["threshold_counts"] for s in feed.board.settings.live] == [31] * 9
        await pilot.press("right", "minus")  # hysteresis 8 -> 7
        run(app, feed, 0.2)
        assert feed.board.settings.live[0]["hysteresis_counts"] == 7
        # The guided capture's outcome is one undoable batch; it travels too.
        app.screen.apply_capture({2: replace(DEMO_SETTINGS, threshold_counts=44)}, {})
        run(app, feed, 0.2)
        assert board_threshold(feed, 2) == 44
        assert "refused" not in log_text(app)


async def test_a_refused_setting_is_marked_in_the_bar_logged_and_the_screen_keeps_going() -> None:
    app, feed, _ = travel_app(NarrowBoardFeed(seed=11, settings=True))
    async with app.run_test(size=(100, 30), notifications=True) as pilot:
        run(app, feed, 1.0)
        await pilot.press("right_square_bracket")  # a coarse step: 40, above 35
        run(app, feed, 0.2)
        assert board_threshold(feed, 0) == 30  # the board kept its own
        text = bar(app)
        assert "✗ refused" in text and "✗ 1 refused" in text
        assert "board refused zone1: threshold_counts: this board takes at most 35" in log_text(app)
        await pilot.press("right", "minus")  # hysteresis is fine on this board
        run(app, feed, 0.2)
        assert "threshold 40✗ ▸hysteresis 7 counts ✓ on board" in bar(app)


async def test_a_board_that_never_answers_is_marked_no_answer_after_the_timeout() -> None:
    app, feed, _ = travel_app(DeafBoardFeed(seed=11, settings=True))
    async with app.run_test(size=(100, 30)) as pilot:
        run(app, feed, 0.5)
        await pilot.press("plus")
        run(app, feed, 0.3)
        assert "… 1 sending" in bar(app)
        run(app, feed, 3.0)
        assert "? 1 no answer" in bar(app)
        log = log_text(app).replace(" ", "")  # the log folds long lines: compare without the blanks
        assert "✗readingtheboard'ssettings:noanswerwithin1s" in log
        assert "✗boarddidnotanswerzone1:threshold_counts:noanswerwithin1s" in log


async def test_a_board_holding_other_settings_asks_take_the_boards_or_send_the_profiles() -> None:
    tuned = replace(demo_profile("greenhouse"), defaults=replace(DEMO_SETTINGS, threshold_counts=45))
    for key, expected_board, expected_screen in (("b", 30, 30), ("p", 45, 45)):
        app, feed, source = travel_app(profile=tuned)
        async with app.run_test(size=(100, 30)) as pilot:
            run(app, feed, 1.0)
            await pilot.pause()
            assert isinstance(app.screen, BoardDiffScreen)
            assert "zone1: threshold_counts is 30 on the board, 45 in the profile" in screen_text(app)
            await pilot.press(key)
            run(app, feed, 1.0)
            assert not isinstance(app.screen, BoardDiffScreen)
            assert board_threshold(feed, 3) == expected_board
            assert source.settings(3).threshold_counts == expected_screen
            assert source.board_differences() == [] or key == "p"


async def test_no_profile_takes_the_boards_settings_and_a_board_without_settings_gets_no_commands() -> None:
    feed = SimFeed(seed=11, settings=True)
    feed.board.settings.live[4]["threshold_counts"] = 52  # the board holds its own for `stop`
    source = SessionSource(feed, port="sim://greenhouse", clock=lambda: feed.t_s)
    app = PadtuneApp(source, ui_hz=0, clock=lambda: feed.t_s)
    async with app.run_test(size=(100, 30)):
        run(app, feed, 1.5)
        assert source.settings(4).threshold_counts == 52 and not source.unsaved()
        assert "took the board's settings" in log_text(app)
    old = SimFeed(seed=11)  # no settings=1
    written: list[bytes] = []
    old.write = lambda data: written.append(data) or True  # type: ignore[method-assign]
    app, _, source = travel_app(old)
    async with app.run_test(size=(100, 30)) as pilot:
        run(app, old, 1.0)
        await pilot.press("plus", "a", "u")
        run(app, old, 0.5)
        assert written == [] and not source.board_sync.active
        assert "on board" not in bar(app) and "✓" not in bar(app)


def test_the_edit_bar_without_a_board_status_is_drawn_as_before() -> None:
    plain = edit_bar("zone1", DEMO_SETTINGS, "threshold_counts", {}, 80, "1/9", 1, "", ())
    same = edit_bar("zone1", DEMO_SETTINGS, "threshold_counts", {}, 80, "1/9", 1, "", (), {})
    assert plain.plain == same.plain and "✓" not in plain.plain


async def test_a_board_that_restarts_silently_is_read_again_and_a_lost_edit_is_shown() -> None:
    # The review's case: an edit the board applied, then a watchdog restart (no new info line: only the
    # sequence jumps back). The board is back on its factory settings; the screen must not go on saying
    # "on board" for the edit, and the user chooses which side wins.
    from devices.faults import FaultPlan

    feed = SimFeed(seed=11, settings=True, faults=FaultPlan.parse(["reset@2"]))
    app, feed, _ = travel_app(feed)
    async with app.run_test(size=(100, 30)) as pilot:
        run(app, feed, 1.0)
        await pilot.press("plus")
        run(app, feed, 0.2)
        assert board_threshold(feed, 0) == 31 and "threshold 31 counts ✓ on board" in bar(app)
        run(app, feed, 1.5)  # past the restart
        assert board_threshold(feed, 0) == 30  # the board lost the edit with its RAM
        assert "the board restarted: reading its settings again" in log_text(app)
        assert isinstance(app.screen, BoardDiffScreen)
        assert "≠" in bar(app) or "differs" in bar(app)
        await pilot.press("p")  # send the session's: the edit is on the board again
        run(app, feed, 0.3)
        assert board_threshold(feed, 0) == 31 and "threshold 31 counts ✓ on board" in bar(app)


async def test_without_a_profile_unsaved_edits_are_never_replaced_silently_by_the_boards() -> None:
    from devices.faults import FaultPlan

    feed = SimFeed(seed=11, settings=True, faults=FaultPlan.parse(["reset@2"]))
    source = SessionSource(feed, port="sim://greenhouse?seed=11", clock=lambda: feed.t_s)  # no profile
    app = PadtuneApp(source, ui_hz=0, clock=lambda: feed.t_s)
    async with app.run_test(size=(100, 30)) as pilot:
        run(app, feed, 1.0)
        assert "took the board's settings" in log_text(app) or "holds the session's" in log_text(app)
        await pilot.press("plus")
        run(app, feed, 1.7)
        assert source.unsaved() and source.settings(0).threshold_counts == 31  # the edit stands
        assert isinstance(app.screen, BoardDiffScreen)  # and the user is asked
