"""Defects found by trying the live screen as a new user would, each through Textual's pilot.

Every test here failed on the screen before its fix (the app was one class over three mixins then);
they drive the screen only by keys and read only what it shows, so they hold whatever the inside.
"""

from __future__ import annotations

import errno
import os
import threading
import time
from pathlib import Path

import numpy as np
from pytest import MonkeyPatch
from textual import events
from textual.pilot import Pilot

from processing.profile import Profile, load_profile, save_profile
from protocol.decoder import Decoder
from protocol.encoder import encode_frame, encode_info
from protocol.events import Event, LinkState, LinkStats
from tests.tui.feeds import SyntheticFeed, log_text, screen_text
from tests.tui.test_app_actions import files_written, make_app, run, type_into_prompt
from tui.app import PadtuneApp
from tui.session_source import SessionSource


def edit_bar_line(app: PadtuneApp) -> str:
    return next(line for line in screen_text(app).splitlines() if "▸" in line)


async def burst(pilot: Pilot, *keys: str) -> None:
    """Keys as a terminal delivers a fast typist's (or a paste): all queued before any is handled."""
    app = pilot.app
    for key in keys:
        char = {"enter": "\r", "escape": "\x1b"}.get(key, key if len(key) == 1 else None)
        app.post_message(events.Key(key, char))
    for _ in range(3 * len(keys) + 6):  # each key may go round once more (typed for a dialog that opened)
        await pilot.pause()


async def test_tab_and_shift_tab_change_the_setting_being_edited() -> None:
    app, feed = make_app()
    async with app.run_test(size=(120, 30)) as pilot:
        run(app, feed, 0.5)
        assert "▸threshold" in edit_bar_line(app)
        await pilot.press("tab")
        assert "▸hysteresis" in edit_bar_line(app)
        await pilot.press("tab")
        assert "▸touch" in edit_bar_line(app)
        await pilot.press("shift+tab", "shift+tab", "shift+tab")  # back past threshold: polarity, the last
        assert "▸polarity" in edit_bar_line(app)
        await pilot.press("tab", "plus")  # and the field chosen with Tab is the one the keys edit
        assert app.source.settings(0).threshold_counts == 101


LONG_BY_ID = "/dev/serial/by-id/usb-Greenhouse_Controls_Irrigation_Touch_Bridge_0123456789ABCDEF-if00-port0"
MANY_FAULTS = ("sim://greenhouse?seed=3&drop=0.02&garble=0.01&repeat=0.01&reset=30&stall=5&crc=0.01"
               "&baud_error=0.001")


async def test_a_long_port_is_cut_in_the_middle_and_the_strip_keeps_the_rest_whole(tmp_path: Path) -> None:
    assert len(LONG_BY_ID) >= 90 and len(MANY_FAULTS) >= 90
    for port in (LONG_BY_ID, MANY_FAULTS):
        feed = SyntheticFeed()
        source = SessionSource(feed, port=port, clock=lambda feed=feed: feed.t_s)
        app = PadtuneApp(source, ui_hz=0, clock=lambda feed=feed: feed.t_s)
        async with app.run_test(size=(80, 24)) as pilot:
            run(app, feed, 1.5)
            await pilot.press("plus")  # an unsaved edit
            source.start_recording(tmp_path / f"a-rather-long-recording-name-for-the-strip-{len(port)}.csv")
            feed._stats.garbled = 3  # a link error to show
            run(app, feed, 1.5)
            await pilot.pause()
            first, second = screen_text(app).splitlines()[:2]
            assert "fps" in first and "115200 Bd" in first, first
            assert "…" in first and port[:8] in first and port[-5:] in first, first
            assert "garbled 3" in second and "*unsaved" in second and "⏺ REC" in second, second
            assert len(first) <= 80 and len(second) <= 80
            source.stop_recording()


async def test_log_lines_written_under_the_detail_panel_take_the_log_width_once_it_closes() -> None:
    app, feed = make_app()
    async with app.run_test(size=(100, 30)) as pilot:
        run(app, feed, 0.5)
        await pilot.press("d")  # the detail panel takes the log's place
        for ch in range(3):
            feed.set_touch(ch, 200)
            run(app, feed, 0.3)
            feed.set_touch(ch, 0)
            run(app, feed, 0.3)
        await pilot.press("d")
        await pilot.pause()
        shown = screen_text(app)
        for name in ("zone1", "zone2", "zone3"):  # each line whole on one screen line, not cut at 11
            assert f"· {name} release after" in shown, shown


async def test_repeated_notices_count_instead_of_stacking_over_the_table() -> None:
    app, feed = make_app()
    async with app.run_test(size=(80, 24), notifications=True) as pilot:  # (off by default in tests)
        run(app, feed, 0.5)
        top = screen_text(app).splitlines()[:14]  # the strip, the table and the edit bar
        await pilot.press("u", "u", "u", "u")
        for _ in range(4):
            await pilot.pause()
        assert [n.message for n in app._notifications] == ["Nothing to undo. (×4)"]
        shown = screen_text(app)
        assert shown.count("Nothing to undo") == 1
        assert shown.splitlines()[:14] == top  # nothing covers the table or the edit bar
        await pilot.press("m")  # another notice replaces it
        assert next(n.message for n in app._notifications).startswith("Not recording")


async def test_the_value_dialog_shows_the_allowed_range() -> None:
    app, feed = make_app()
    async with app.run_test(size=(100, 30)) as pilot:
        run(app, feed, 0.5)
        await pilot.press("enter")
        assert "allowed: 16 … 16777216 counts" in screen_text(app)  # above the hysteresis (15)
        await pilot.press("escape", "tab", "tab", "tab", "tab", "tab", "tab", "enter")  # baseline period
        assert "1, 2, 4 … 256 frames (powers of two)" in screen_text(app)


async def test_digits_typed_in_the_same_burst_as_the_key_that_opens_the_dialog_are_kept() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await burst(pilot, "down", "enter", "5", "0", "enter")
        assert app.source.settings(1).threshold_counts == 50
        assert app.screen is app.live
        await burst(pilot, "e", "6", "0")  # the dialog open: the typed text replaces the proposed one
        assert app.screen.query_one("#prompt-input").value == "60"
        await burst(pilot, "escape")
        assert app.source.settings(1).threshold_counts == 50


async def test_quit_with_unsaved_edits_offers_to_save_first(tmp_path: Path) -> None:
    target = tmp_path / "keys.toml"
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("plus", "q")
        text = screen_text(app)
        assert "save, then quit" in text and "quit without saving" in text and "cancel" in text
        await pilot.press("escape")  # cancel
        assert app.is_running and app.screen is app.live
        await pilot.press("q", "s")  # no file yet: asks where, saves, then quits
        await type_into_prompt(pilot, str(target))
        await files_written(pilot)
    assert not app.is_running
    assert load_profile(target).settings_for(0).threshold_counts == 101


async def test_save_and_quit_stays_when_the_save_fails(tmp_path: Path, monkeypatch: MonkeyPatch) -> None:
    target = tmp_path / "keys.toml"
    app, feed = make_app(profile_path=target)
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        save_profile(app.source.session.profile, target)  # type: ignore[attr-defined]
        await pilot.press("plus")

        def full_disk(fd: int) -> None:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

        monkeypatch.setattr(os, "fsync", full_disk)  # the disk is full when the new file is synced
        await pilot.press("q", "s")
        await files_written(pilot)
        monkeypatch.undo()
        assert app.is_running, "a failed save must not quit"
        notices = [n.message for n in app._notifications]
        assert len(notices) == 1 and "\n" not in notices[0] and "No space left on device" in notices[0]
        assert "profile not written" in log_text(app)
        assert "*unsaved" in screen_text(app)  # the edit is still here
        assert load_profile(target).settings_for(0).threshold_counts == 100  # the old file is unchanged
        await pilot.press("s")  # room again: the same edit saves
        await files_written(pilot)
        assert load_profile(target).settings_for(0).threshold_counts == 101


async def test_undo_and_redo_say_what_they_undid_and_redid() -> None:
    app, feed = make_app()
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("plus", "u", "U")
        log = log_text(app)
        assert "undid zone1: threshold 100 → 101 (threshold 100 again)" in log
        assert "redid zone1: threshold 100 → 101" in log


async def test_one_frame_is_a_frame() -> None:
    app, feed = make_app()
    async with app.run_test(size=(120, 30)) as pilot:
        run(app, feed, 0.5)
        await pilot.press("tab", "tab", "minus", "minus")  # touch debounce 3 -> 1
        assert "▸touch 1 frame " in edit_bar_line(app) + " "
        await pilot.press("d")
        run(app, feed, 0.1)
        await pilot.pause()
        assert "touch debounce           1 frame " in screen_text(app)


class RawFeed(SyntheticFeed):
    """Bytes through the real decoder: a board that prints one garbled line among its frames."""

    def __init__(self, raw: bytes) -> None:
        super().__init__()
        self.decoder = Decoder()
        self.raw = raw
        self.queue = []

    def advance(self, seconds: float) -> None:
        self.t_s += seconds
        self.queue += self.decoder.feed(self.raw, self.t_s)
        self.raw = b""

    def drain(self, max_events: int | None = None) -> list[Event]:
        out, self.queue = self.queue, []
        return out

    @property
    def stats(self) -> LinkStats:
        return self.decoder.stats.snapshot()

    @property
    def state(self) -> LinkState:
        return LinkState.CONNECTED


async def test_a_garbled_line_is_escaped_once_in_the_log() -> None:
    info = encode_info({"proto": 1, "board": "raw", "channels": 2, "rate": 100}, checksum=False)
    frames = [encode_frame([1000, 1001], seq=i, checksum=False) for i in range(40)]
    garbled = b"@20 1000 \xff\xfe \\ x\x01\n"
    feed = RawFeed(info + b"".join(frames[:20]) + garbled + b"".join(frames[21:]))
    app = PadtuneApp(SessionSource(feed, port="test://raw", clock=lambda: feed.t_s), ui_hz=0,
                     clock=lambda: feed.t_s)
    async with app.run_test(size=(120, 30)):
        run(app, feed, 0.2)
        log = log_text(app)
        assert "garbled" in log
        assert r"'@20 1000 \xff\xfe \\ x\x01'" in log, log  # each byte escaped once, as Python writes it
        assert r"\\xff" not in log


async def test_while_a_key_measures_its_noise_its_threshold_is_not_shown_as_100() -> None:
    feed = SyntheticFeed(polarity=())
    app = PadtuneApp(SessionSource(feed, port="test://feed", clock=lambda: feed.t_s), ui_hz=0,
                     clock=lambda: feed.t_s)
    async with app.run_test(size=(120, 30)) as pilot:
        run(app, feed, 0.5)
        bar = edit_bar_line(app)
        assert "measuring noise" in bar and "▸threshold -- (set from its noise)" in bar, bar
        assert "100" not in bar and "hysteresis --" in bar
        await pilot.press("d")
        run(app, feed, 0.1)
        await pilot.pause()
        detail = [line for line in screen_text(app).splitlines() if "▸ threshold" in line]
        assert detail and detail[0].rstrip().endswith("--") and "100" not in detail[0], detail
        assert "release at --" in screen_text(app)
        assert "== threshold" not in screen_text(app)  # nor drawn in the plot
        run(app, feed, 1.0)  # measured: its own threshold now
        bar = edit_bar_line(app)
        assert "provisional" in bar and "--" not in bar and "▸threshold 100" not in bar, bar


async def test_a_slow_save_runs_off_the_screen_thread_one_at_a_time(tmp_path: Path,
                                                                     monkeypatch: MonkeyPatch) -> None:
    import tui.session_source

    real_save = tui.session_source.save_profile
    release = threading.Event()
    calls: list[tuple[str, int]] = []
    writing, most = [0], [0]

    def slow_save(profile: Profile, path: Path) -> None:  # a slow disk: fsync takes its time
        writing[0] += 1
        most[0] = max(most[0], writing[0])
        calls.append((threading.current_thread().name, profile.settings_for(0).threshold_counts))
        try:
            assert release.wait(20)
            real_save(profile, path)
        finally:
            writing[0] -= 1

    monkeypatch.setattr(tui.session_source, "save_profile", slow_save)
    target = tmp_path / "keys.toml"
    app, feed = make_app(profile_path=target)
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        await pilot.press("plus", "s")
        end = time.monotonic() + 20
        while not calls:
            assert time.monotonic() < end
            await pilot.pause(0.01)
        assert calls[0][0] != threading.current_thread().name  # written by a worker thread
        feed.set_touch(0, 300)  # the screen goes on while the disk is slow
        run(app, feed, 0.5)
        await pilot.press("down")
        shown = screen_text(app)
        assert "● TOUCH" in shown and "saving…" in shown and "*unsaved" in shown
        await pilot.press("up", "plus", "s")  # a second save meanwhile waits for the first
        await pilot.pause()
        assert len(calls) == 1
        release.set()
        await files_written(pilot)
        assert [t for _, t in calls] == [101, 102] and most[0] == 1
        assert load_profile(target).settings_for(0).threshold_counts == 102
        shown = screen_text(app)
        assert "saving…" not in shown and "*unsaved" not in shown
        assert log_text(app).count(f"profile written to {target}") == 2


async def test_counts_in_the_log_agree_in_number() -> None:
    from protocol.events import BoardChanged, FrameBlock

    feed = SyntheticFeed(names=("tap", "hold"), rate_hz=40.0, polarity=())  # 25 ms at 40 Hz: 1 frame
    app = PadtuneApp(SessionSource(feed, port="test://feed", clock=lambda: feed.t_s), ui_hz=0,
                     clock=lambda: feed.t_s)
    async with app.run_test(size=(120, 30)):
        run(app, feed, 2.0)
        assert "debounce 1 frame." in log_text(app)
        t = feed.t_s + (1 + np.arange(10)) / 40
        feed.queue += [BoardChanged(float(t[0]), 2, 1), FrameBlock(t, np.arange(10), np.full((10, 1), 1000),
                                                                   feed.index)]
        app.refresh_now()
        assert "board now has 1 channel (was 2)" in log_text(app)


async def test_a_burst_of_notices_leaves_one() -> None:
    app, feed = make_app()
    async with app.run_test(size=(80, 24), notifications=True) as pilot:
        run(app, feed, 0.5)
        await burst(pilot, "u", "u", "u", "u", "U")  # as fast as a terminal delivers a held key
        assert [n.message for n in app._notifications] == ["Nothing to redo."]
        assert screen_text(app).count("Nothing to") == 1


async def test_editing_keys_in_a_burst_act_in_their_turn(tmp_path: Path) -> None:
    app, feed = make_app()
    target = tmp_path / "burst.toml"
    async with app.run_test() as pilot:
        run(app, feed, 0.5)
        typed = str(target)
        await burst(pilot, "plus", "S", "ctrl+a", "ctrl+k", *typed[:-1], "x", "left", "right", "backspace",
                    typed[-1], "enter")  # the proposed name cleared, the path typed with a slip mended
        await files_written(pilot)
        assert app.screen is app.live
        assert load_profile(target).settings_for(0).threshold_counts == 101
