"""Every action of the live screen through Textual's pilot, on the real session fed by a test feed.

The screen timer is off (`ui_hz=0`): each test moves the feed's clock and calls `refresh_now()`,
which is exactly what the timer does, so nothing depends on threads or wall time.
"""

from __future__ import annotations

import os
import time
from pathlib import Path

import numpy as np
import pytest
from textual.pilot import Pilot

from processing.detections import KeyState
from processing.profile import load_profile, profile_for
from processing.recording import read_recording
from processing.session import Session
from protocol.errors import UserError
from tests.tui.feeds import SimFeed, SyntheticFeed, log_text, screen_text
from tui.app import PadtuneApp
from tui.bindings import help_rows, key_actions
from tui.demo_profile import demo_profile
from tui.render.help import SAFETY_CAUTIONS
from tui.screens.confirm import ConfirmScreen, QuitScreen
from tui.screens.help import HelpScreen
from tui.screens.live import LiveScreen
from tui.screens.prompt import PromptScreen
from tui.session_source import SessionSource
from tui.widgets.channel_table import ChannelTable


def make_app(feed: SyntheticFeed | None = None, **source_args: object) -> tuple[PadtuneApp, SyntheticFeed]:
    """The app on a synthetic feed, with the default settings given as a profile (these tests are about
    the screen's actions; test_first_contact_screen.py has the board met with no profile)."""
    feed = feed or SyntheticFeed()
    source_args.setdefault("profile", profile_for(len(feed.names)))
    source = SessionSource(feed, port="test://feed", clock=lambda: feed.t_s, **source_args)
    return PadtuneApp(source, ui_hz=0, clock=lambda: feed.t_s), feed


def run(app: PadtuneApp, feed: SyntheticFeed | SimFeed, seconds: float, step_s: float = 0.05) -> None:
    for _ in range(max(1, round(seconds / step_s))):
        feed.advance(step_s)
        app.refresh_now()


async def type_into_prompt(pilot: Pilot, text: str) -> None:
    assert isinstance(pilot.app.screen, PromptScreen)
    await pilot.press("ctrl+a", "ctrl+k")  # clear the proposed value
    await pilot.press(*list(text))
    await pilot.press("enter")
    await pilot.pause()
    await files_written(pilot)


async def files_written(pilot: Pilot, deadline_s: float = 20.0) -> None:
    """Wait for the file writes the screen started (one at a time, in thread workers) and their results."""
    app = pilot.app
    assert isinstance(app, PadtuneApp)
    end = time.monotonic() + deadline_s
    while True:
        await app.workers.wait_for_complete()
        await pilot.pause()  # the result is handled on the screen's thread, which may start the next
        if not app.live.files.busy:
            return
        assert time.monotonic() < end, "the file writes did not finish"


def session_of(app: PadtuneApp) -> Session:
    return app.source.session  # type: ignore[attr-defined]


async def test_typed_threshold_changes_live_detection() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 1.0)
        await pilot.press("down")  # zone2
        feed.set_touch(1, 80)  # below the default threshold of 100: no touch
        run(app, feed, 0.5)
        engine = session_of(app).engine
        assert engine.states[1] == KeyState.RELEASED
        await pilot.press("enter")
        await type_into_prompt(pilot, "50")
        assert engine.settings[1].threshold_counts == 50
        run(app, feed, 0.3)
        assert engine.states[1] == KeyState.TOUCHED
        assert "● TOUCH" in screen_text(app)
        assert "zone2: threshold 100 → 50" in screen_text(app)
        assert app.source.unsaved()


async def test_fine_and_coarse_steps_and_field_choice() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("plus", "plus", "right_square_bracket")
        assert app.source.settings(0).threshold_counts == 100 + 1 + 1 + 10
        await pilot.press("left_square_bracket", "minus")
        assert app.source.settings(0).threshold_counts == 101
        await pilot.press("right")  # hysteresis
        await pilot.press("plus")
        assert app.source.settings(0).hysteresis_counts == 16
        await pilot.press("right", "right", "right", "right", "right")  # baseline period doubles
        await pilot.press("plus")
        assert app.source.settings(0).baseline_period_frames == 32
        assert app.source.settings(1) == session_of(app).profile.defaults  # others untouched


async def test_refused_values_keep_the_old_one_and_say_why() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("right", "enter")  # hysteresis
        await type_into_prompt(pilot, "150")
        assert isinstance(app.screen, PromptScreen)  # still open, with the reason
        error = str(app.screen.query_one("#prompt-error").render())
        assert "below the threshold" in error
        await pilot.press("escape")
        assert app.source.settings(0).hysteresis_counts == 15
        await pilot.press("enter")
        await type_into_prompt(pilot, "abc")
        assert "whole number" in str(app.screen.query_one("#prompt-error").render())
        await pilot.press("escape")
        await pilot.press("left")  # threshold: stepping below 1 is refused, the value stays
        for _ in range(3):
            await pilot.press("left_square_bracket")
        await pilot.pause()
        assert app.source.settings(0).threshold_counts == 70
        app.source.apply(0, app.source.settings(0).__class__(threshold_counts=5, hysteresis_counts=2))
        await pilot.press("left_square_bracket")
        assert app.source.settings(0).threshold_counts == 5
        assert not app.live.editor.history.can_undo or app.source.settings(0).threshold_counts == 5


async def test_undo_and_redo_restore_the_engine() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        engine = session_of(app).engine
        await pilot.press("plus", "plus", "a")  # 102 on zone1, then copied to all
        assert [s.threshold_counts for s in engine.settings] == [102] * 5
        await pilot.press("u")
        assert [s.threshold_counts for s in engine.settings] == [102, 100, 100, 100, 100]
        await pilot.press("u", "u")
        assert [s.threshold_counts for s in engine.settings] == [100] * 5
        assert not app.source.unsaved()
        await pilot.press("u")  # nothing left: says so, changes nothing
        await pilot.press("U")
        assert engine.settings[0].threshold_counts == 101
        await pilot.press("ctrl+y", "ctrl+y")
        assert [s.threshold_counts for s in engine.settings] == [102] * 5


async def test_apply_to_group_only_touches_the_group() -> None:
    feed = SimFeed()
    source = SessionSource(feed, port="sim://greenhouse", profile=demo_profile("greenhouse"),
                           clock=lambda: feed.t_s)
    app = PadtuneApp(source, ui_hz=0, clock=lambda: feed.t_s, demo=True)
    async with app.run_test() as pilot:
        run(app, feed, 1.0)
        await pilot.press("plus", "g")
        names = source.channel_names()
        thresholds = {n: source.settings(i).threshold_counts for i, n in enumerate(names)}
        assert {thresholds[f"zone{i}"] for i in range(1, 5)} == {31}
        assert thresholds["stop"] == 30 and thresholds["dur0"] == 30
        await pilot.press("end", "g")  # dur3 is in no group: refused with a notice, nothing changes
        assert source.settings(len(names) - 1).threshold_counts == 30


async def test_save_writes_a_valid_profile_and_clears_unsaved(tmp_path: Path) -> None:
    app, feed = make_app()
    target = tmp_path / "keys.toml"
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("down", "plus")
        assert "*unsaved" in screen_text(app)
        await pilot.press("s")  # no file yet: asks where
        await type_into_prompt(pilot, str(target))
        assert not isinstance(app.screen, PromptScreen)
        saved = load_profile(target)
        assert saved.settings_for(1).threshold_counts == 101
        assert saved.settings_for(0).threshold_counts == 100
        assert saved.names == feed.names
        assert not app.source.unsaved()
        run(app, feed, 0.1)
        text = screen_text(app)
        assert "keys.toml" in text and "*unsaved" not in text
        await pilot.press("plus", "s")  # a second save goes to the same file at once
        await files_written(pilot)
        assert load_profile(target).settings_for(1).threshold_counts == 102
        assert (tmp_path / "keys.toml.bak").exists()


async def test_save_as_refuses_a_missing_folder(tmp_path: Path) -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("S")
        await type_into_prompt(pilot, str(tmp_path / "nope" / "x.toml"))
        assert "does not exist" in str(app.screen.query_one("#prompt-error").render())
        await pilot.press("escape")
        assert not list(tmp_path.iterdir())


async def test_load_replaces_settings_and_export_writes_a_header(tmp_path: Path) -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("plus", "plus", "plus")
        await pilot.press("S")
        await type_into_prompt(pilot, str(tmp_path / "a.toml"))
        await pilot.press("minus")
        assert app.source.unsaved()
        await pilot.press("o")
        assert isinstance(app.screen, ConfirmScreen)  # loading would drop the unsaved edit
        await pilot.press("y")
        await type_into_prompt(pilot, str(tmp_path / "missing.toml"))
        assert "no such profile" in str(app.screen.query_one("#prompt-error").render())
        await pilot.press("ctrl+a", "ctrl+k")
        await type_into_prompt(pilot, str(tmp_path / "a.toml"))
        assert app.source.settings(0).threshold_counts == 103
        assert not app.source.unsaved()
        await pilot.press("x")
        await type_into_prompt(pilot, str(tmp_path / "keys.h"))
        header = (tmp_path / "keys.h").read_text()
        assert "103" in header
        assert f"firmware export written to {tmp_path / 'keys.h'}" in log_text(app)


async def test_quit_asks_when_edits_are_unsaved() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("plus", "q")
        assert isinstance(app.screen, QuitScreen)
        assert "unsaved" in screen_text(app)
        await pilot.press("n")
        assert not isinstance(app.screen, QuitScreen)
        assert app.is_running
        await pilot.press("q", "y")
        await pilot.pause()
    assert not app.is_running


async def test_quit_without_edits_does_not_ask() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("q")
        await pilot.pause()
    assert not app.is_running


async def test_disconnect_shows_at_once_and_clears_and_edits_survive() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("plus")
        feed.disconnect()
        app.refresh_now()
        text = screen_text(app)
        assert "RECONNECTING" in text
        assert "link disconnected" in text
        assert app.query_one("#link").has_class("-down")
        feed.reconnect()
        run(app, feed, 0.5)
        text = screen_text(app)
        assert "RECONNECTING" not in text and "● connected" in text
        assert not app.query_one("#link").has_class("-down")
        assert app.source.settings(0).threshold_counts == 101
        assert "*unsaved" in text


async def test_rebaseline_one_and_all() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 1.0)
        feed.base += 40  # everything drifts up at once
        run(app, feed, 0.1)
        assert session_of(app).engine.deltas[2] >= 35
        await pilot.press("down", "down", "b")
        run(app, feed, 0.1)
        deltas = session_of(app).engine.deltas
        assert abs(deltas[2]) <= 5 and deltas[0] >= 35
        await pilot.press("B")
        run(app, feed, 0.1)
        assert all(abs(d) <= 5 for d in session_of(app).engine.deltas)
        assert "re-baselined" in screen_text(app)


async def test_pause_freezes_the_display_but_not_detection() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("space")
        before = screen_text(app).splitlines()[3]
        feed.set_touch(0, 300)
        run(app, feed, 0.5)
        assert session_of(app).engine.states[0] == KeyState.TOUCHED
        text = screen_text(app)
        assert text.splitlines()[3] == before  # zone1's row did not move
        assert "DISPLAY PAUSED" in text
        assert "zone1 touch" in text  # the log keeps running
        await pilot.press("space")
        run(app, feed, 0.1)
        assert "● TOUCH" in screen_text(app)


async def test_recording_with_a_mark(tmp_path: Path) -> None:
    app, feed = make_app()
    target = tmp_path / "run.csv"
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("m")  # not recording: says so
        await pilot.press("r")
        await type_into_prompt(pilot, str(target))
        run(app, feed, 1.0)
        assert "⏺ REC" in screen_text(app)
        await pilot.press("m")
        run(app, feed, 1.0)
        await pilot.press("r")
        assert "rec off" in screen_text(app)
    rec = read_recording(target)
    assert rec.frames == 200
    assert rec.names == feed.names
    assert [m.text for m in rec.marks] == ["mark at zone1"]


async def test_demo_keys_press_the_simulated_board() -> None:
    feed = SimFeed()
    source = SessionSource(feed, port="sim://greenhouse", profile=demo_profile("greenhouse"),
                           clock=lambda: feed.t_s)
    app = PadtuneApp(source, ui_hz=0, clock=lambda: feed.t_s, demo=True)
    async with app.run_test() as pilot:
        run(app, feed, 1.5)
        await pilot.press("2")
        assert feed.board.held() == ["zone2"]
        run(app, feed, 0.5)
        assert source.session.engine.states[1] == KeyState.TOUCHED
        text = screen_text(app)
        assert "zone2 touch" in text and "group zones: ● zone2 wins" in text
        await pilot.press("2")
        run(app, feed, 0.5)
        assert feed.board.held() == []
        assert source.session.engine.states[1] == KeyState.RELEASED
        assert "zone2 release" in log_text(app)


async def test_key_presses_refused_on_a_real_port() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("1", "t")
        assert feed.written == []


async def test_detail_panel_and_spectrum() -> None:
    app, feed = make_app()
    async with app.run_test(size=(120, 40)) as pilot:
        run(app, feed, 3.0)
        await pilot.press("d")
        app.refresh_now()
        await pilot.pause()
        text = screen_text(app)
        assert "reading ⣿" in text and "release at" in text and "▸ threshold" in text
        await pilot.press("f")
        run(app, feed, 0.2)
        await pilot.pause()
        # The feed's noise is white: the finding says so rather than naming a source for a fluke bin.
        assert "noise" in screen_text(app) and "no distinct tone" in screen_text(app)
        await pilot.press("d")
        assert not app.query_one("#detail").display


async def test_help_lists_every_binding_and_the_cautions() -> None:
    app, feed = make_app()
    async with app.run_test(size=(120, 40)) as pilot:
        run(app, feed, 0.2)
        await pilot.press("question_mark")
        assert isinstance(app.screen, HelpScreen)
        await pilot.pause()
        shown = app.screen.query_one("#help-keys").render()
        assert shown is not None
        rows = help_rows(key_actions(app.live.active_bindings))
        every = [*ChannelTable.BINDINGS, *LiveScreen.BINDINGS, *PadtuneApp.BINDINGS]
        described = {b.tooltip or b.description for b in every if not (b.id or "").startswith("demo.key")
                     and not (b.id or "").startswith("chan.zoom")}
        assert described <= {r[2] for r in rows}
        # the detail panel's zoom keys act while it shows; closed, the help says them in a note
        assert any(r[1] == "z,Z" and "zoom out to 1 min" in r[2] for r in rows)
        assert "Next channel" in screen_text(app)  # the table's own keys come first
        safety = str(app.screen.query_one("#help-safety").render())
        assert "isolat" in safety and "not safety controls" in safety
        assert len(SAFETY_CAUTIONS) == 3
        await pilot.press("escape")
        assert not isinstance(app.screen, HelpScreen)


async def test_command_palette_lists_actions_by_name() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        commands = {c.title: c for c in app.get_system_commands(app.screen)}
        assert {"Save the profile", "Undo the last edit", "Re-baseline all channels", "Next channel"} <= set(
            commands)
        assert {"Theme", "Keys", "Screenshot", "Quit"} <= set(commands)  # Textual's own stay
        assert commands["Next channel"].help == "key: ↓ / j"
        await pilot.press("ctrl+p")
        await pilot.pause()
        assert app.screen.__class__.__name__ == "CommandPalette"
        await pilot.press(*"raise the setting (fine", "enter")  # found by name, run on the live screen
        await pilot.pause()
        assert app.screen is app.live and app.source.settings(0).threshold_counts == 101
        await commands["Next channel"].callback()  # a widget's key, run on the table
        assert app.live.cursor == 1


async def test_moving_through_64_channels_keeps_the_cursor_in_view() -> None:
    feed = SyntheticFeed(names=tuple(f"k{i}" for i in range(64)))
    app, feed = make_app(feed)
    async with app.run_test() as pilot:
        run(app, feed, 0.3)
        await pilot.press("end")
        text = screen_text(app)
        assert "▶ k63" in text and "/64" in text
        await pilot.press("pageup", "home")
        assert "▶ k0" in screen_text(app)


async def test_touch_events_land_in_the_log_and_the_detail_history() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 1.0)
        feed.set_touch(0, 200)
        run(app, feed, 0.5)
        feed.set_touch(0, 0)
        run(app, feed, 0.5)
        lines = list(app.live.feed.recent[0])
        assert any("touch" in line for line in lines) and any("release" in line for line in lines)
        await pilot.press("d")
        assert "zone1 release" in screen_text(app)


async def test_live_keys_do_nothing_under_a_dialog_and_q_can_be_typed() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("question_mark")
        await pilot.press("plus", "a", "b")
        run(app, feed, 0.2)  # the screen timer keeps running under the help screen
        assert app.source.settings(0).threshold_counts == 100
        await pilot.press("q")  # closes help, does not quit
        assert app.is_running and not isinstance(app.screen, HelpScreen)
        await pilot.press("S")
        await pilot.press("ctrl+a", "ctrl+k", "q", "+")
        run(app, feed, 0.2)
        assert isinstance(app.screen, PromptScreen)
        assert app.screen.query_one("#prompt-input").value == "q+"
        assert app.source.settings(0).threshold_counts == 100
        await pilot.press("escape")


async def test_capture_wizard_opens_on_w() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("w")
        await pilot.pause()
        assert app.screen.__class__.__name__ == "CaptureScreen"
        run(app, feed, 0.5)  # the live screen keeps polling under it
        await pilot.press("escape")
        await pilot.pause()
        assert app.screen is app.screen_stack[0]


async def test_save_as_and_export_ask_before_replacing_a_file(tmp_path: Path) -> None:
    app, feed = make_app()
    other = tmp_path / "other.toml"
    other.write_text("# someone else's file\n")
    header = tmp_path / "keys.h"
    header.write_text("/* old */\n")
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("plus", "S")
        await type_into_prompt(pilot, str(other))
        assert "press Enter again" in str(app.screen.query_one("#prompt-error").render())
        assert other.read_text() == "# someone else's file\n"
        await pilot.press("enter")
        await files_written(pilot)
        assert load_profile(other).settings_for(0).threshold_counts == 101
        assert (tmp_path / "other.toml.bak").read_text() == "# someone else's file\n"
        await pilot.press("x")
        await type_into_prompt(pilot, str(header))
        assert "press Enter again" in str(app.screen.query_one("#prompt-error").render())
        await pilot.press("enter")
        await files_written(pilot)
        assert "101" in header.read_text()
        await pilot.press("r")
        await type_into_prompt(pilot, str(header))
        assert "never overwritten" in str(app.screen.query_one("#prompt-error").render())
        await pilot.press("escape")


async def test_a_silent_board_is_flagged_and_its_rows_look_stale() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        for _ in range(30):  # three seconds without a frame
            feed.t_s += 0.1
            app.refresh_now()
        await pilot.pause()
        assert "NO FRAMES for 3 s" in screen_text(app)
        assert app.query_one("#table").has_class("-stale")
        run(app, feed, 0.2)
        assert "NO FRAMES" not in screen_text(app)
        assert not app.query_one("#table").has_class("-stale")


async def test_no_color_keeps_every_state_readable(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("NO_COLOR", "1")
    app, feed = make_app()
    assert app.no_color
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        feed.set_touch(1, 300)
        run(app, feed, 0.3)
        await pilot.pause()
        text = screen_text(app)
        assert "▶ zone1" in text and "● TOUCH" in text and "· idle" in text and "┃" in text


async def test_before_the_first_frame_keys_say_why_they_wait() -> None:
    app, feed = make_app(profile=None)
    feed.queue.clear()  # not even the info line yet
    async with app.run_test() as pilot:
        app.refresh_now()
        await pilot.press("plus", "enter", "a", "b", "d", "t", "d")
        await pilot.pause()
        assert "waiting for the board" in screen_text(app)
        await pilot.press("s")
        await type_into_prompt(pilot, "keys.toml")
        assert "nothing to save yet" in str(app.screen.query_one("#prompt-error").render())
        await pilot.press("escape")
        assert app.is_running


async def test_a_wider_board_rebuilds_the_table_and_drops_the_history() -> None:
    from protocol.events import BoardChanged, FrameBlock

    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("plus")
        assert app.live.editor.history.can_undo
        n = 10
        readings = 1000 + feed.rng.integers(-2, 3, size=(n, 8))
        t = feed.t_s + (1 + np.arange(n)) / 100
        feed.queue += [BoardChanged(float(t[0]), 5, 8),
                       FrameBlock(t, np.arange(n), readings, feed.index)]
        app.refresh_now()
        await pilot.pause()
        assert len(app.source.channel_names()) == 8
        assert not app.live.editor.history.can_undo
        assert "edit history was cleared" in log_text(app)
        await pilot.press("end")
        assert app.live.cursor == 7


async def test_a_full_disk_stops_the_recording_says_why_and_the_app_runs_on(tmp_path: Path) -> None:
    app, feed = make_app()
    target = tmp_path / "full.csv"
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("r")
        await type_into_prompt(pilot, str(target))
        run(app, feed, 0.5)
        assert "⏺ REC" in screen_text(app)
        # The disk fills up: every write from now on fails as on a full disk (ENOSPC from /dev/full).
        pipeline = app.source.pipeline  # type: ignore[attr-defined]
        full = os.open("/dev/full", os.O_WRONLY)
        os.dup2(full, pipeline.recorder.writer._fd)
        os.close(full)
        run(app, feed, 1.0)  # the writer thread flushes every 0.25 s (the feed's clock) and fails
        assert pipeline.settle(30.0)
        run(app, feed, 0.05)  # the next screen tick tells it
        await pilot.pause()
        shown = screen_text(app)
        assert "✗ REC FAILED (disk full)" in shown
        assert "recording stopped" in log_text(app) and "No space left on device" in log_text(app)
        assert any("No space left" in n.message for n in app._notifications)
        assert app.source.link_view().recording is None
        run(app, feed, 0.5)  # the app goes on; detection too
        feed.set_touch(0, 300)
        run(app, feed, 0.5)
        assert "● TOUCH" in screen_text(app)
        await pilot.press("m")  # nothing recording now: says so, does not raise
        assert "Not recording" in "".join(n.message for n in app._notifications)
    assert target.exists()


async def test_a_recording_to_dev_full_fails_on_stop_with_the_reason(tmp_path: Path) -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.2)
        source = app.source
        source.start_recording(tmp_path / "r.csv")  # type: ignore[attr-defined]
        pipeline = source.pipeline  # type: ignore[attr-defined]
        full = os.open("/dev/full", os.O_WRONLY)
        os.dup2(full, pipeline.recorder.writer._fd)
        os.close(full)
        feed.advance(0.05)
        source.poll()  # buffered, not yet flushed (the flush comes every 0.25 s)
        await pilot.press("r")  # stop: the writer thread cannot write the last rows
        assert pipeline.settle(30.0)
        run(app, feed, 0.05)  # the next screen tick tells it
        await pilot.pause()
        assert "REC FAILED" in screen_text(app)
        assert "recording stopped" in log_text(app) and "No space left on device" in log_text(app)
        assert not isinstance(app.screen, PromptScreen)


def test_source_mark_writes_typed_marks_and_reports_a_failed_write(tmp_path: Path) -> None:
    feed = SyntheticFeed()
    source = SessionSource(feed, port="test://feed", clock=lambda: feed.t_s)
    feed.advance(0.5)
    source.poll()
    assert source.mark("note", text="before") is False  # not recording
    source.start_recording(tmp_path / "m.csv")
    feed.advance(0.5)
    source.poll()
    assert source.mark("touch-start", "zone2", "hold zone 2")
    assert source.mark("touch-end", "zone2", t_s=feed.t_s + 0.1)
    with pytest.raises(UserError, match="unknown mark kind"):
        source.mark("touch-begin", "zone2")
    assert source.link_view().recording is not None  # a bad kind writes nothing and stops nothing
    path = source.stop_recording()
    assert path is not None and source.pipeline.settle(30.0)  # its writer thread finishes the file
    marks = read_recording(path).marks
    assert [(m.kind, m.channel, m.text) for m in marks] == [("touch-start", "zone2", "hold zone 2"),
                                                            ("touch-end", "zone2", "")]
    assert marks[1].t_s == pytest.approx(marks[0].t_s + 0.1)

    source.start_recording(tmp_path / "m2.csv")
    recorder = source.pipeline.recorder
    assert recorder is not None
    full = os.open("/dev/full", os.O_WRONLY)
    os.dup2(full, recorder.writer._fd)  # type: ignore[arg-type]
    os.close(full)
    recorder.writer.flush_interval_s = 0.0  # the writer thread hands the mark to the disk at once
    assert source.mark("note", text="lost")  # handed over: the caller never waits for the disk
    assert source.pipeline.settle(30.0)
    assert source.link_view().recording is None
    assert "No space left" in (source.link_view().recording_error or "")
    feed.advance(0.05)
    assert any("recording stopped" in e for e in source.poll().errors)
    source.close()
    assert source.exit_problems == []


async def test_a_long_log_line_wraps_under_itself_at_80_columns() -> None:
    app, feed = make_app()
    async with app.run_test(size=(80, 24)) as pilot:
        run(app, feed, 0.5)
        feed.disconnect()
        run(app, feed, 0.2)
        await pilot.pause()
        lines = screen_text(app).splitlines()
        at = next(i for i, line in enumerate(lines) if "link disconnected" in line)
        # the reason is on the screen whole, on the next line, indented past the time column
        assert "device went away" in lines[at] + lines[at + 1]
        start = lines[at].index("0.50") + 5
        assert lines[at + 1][start:].strip() and not lines[at + 1][start - 5:start].strip()


async def test_live_keys_stay_under_the_capture_screen_and_a_dialog() -> None:
    """A screen on top covers the live screen's keys by Textual's own rules (no `check_action` lists):
    the capture screen binds what it needs itself (the simulated board's keys among them)."""
    feed = SimFeed(script=False)
    source = SessionSource(feed, port="sim://greenhouse", profile=demo_profile("greenhouse"),
                           clock=lambda: feed.t_s)
    app = PadtuneApp(source, ui_hz=0, clock=lambda: feed.t_s, demo=True)
    async with app.run_test() as pilot:
        run(app, feed, 1.0)
        await pilot.press("w")
        await pilot.pause()
        assert app.screen.__class__.__name__ == "CaptureScreen"
        await pilot.press("1")  # choosing the keys: the board's keys press nothing yet
        assert feed.board.held() == []
        await pilot.press("enter")  # all keys: the capture's own keys press the board from now on
        await pilot.press("1")  # in the demo the keyboard is the finger
        assert feed.board.held() == ["zone1"]
        await pilot.press("1")
        assert feed.board.held() == []
        await pilot.press("plus", "right_square_bracket", "u")  # live edit keys: not the capture's
        assert source.settings(0) == demo_profile("greenhouse").settings_for(0)
        await pilot.press("escape")
        await pilot.pause()
        await pilot.press("question_mark")
        assert isinstance(app.screen, HelpScreen)
        await pilot.press("1")  # under help (a dialog) the live keys stay off
        assert feed.board.held() == []
        await pilot.press("escape", "1")
        assert feed.board.held() == ["zone1"]
