"""The capture screen opened from the live app's `w` key, applied as one undoable edit."""

from __future__ import annotations

from tests.tui.feeds import SyntheticFeed, screen_text
from tui.app import PadtuneApp
from tui.screens.capture import CaptureScreen
from tui.session_source import SessionSource


class Clock:
    def __init__(self) -> None:
        self.t_s = 0.0

    def __call__(self) -> float:
        return self.t_s


async def test_w_opens_the_capture_and_apply_all_is_one_undoable_edit():
    feed = SyntheticFeed(noise_counts=2)
    clock = Clock()
    source = SessionSource(feed, port="test://feed", clock=clock)
    app = PadtuneApp(source, ui_hz=0, clock=clock)
    async with app.run_test(size=(100, 32)) as pilot:
        feed.advance(1.5)  # past the quiet second: the provisional settings are in
        app.refresh_now()
        before = [source.settings(c) for c in range(5)]
        assert all(source.session.provisional(c) for c in range(5))
        await pilot.press("w")
        await pilot.pause()
        screen = app.screen
        assert isinstance(screen, CaptureScreen)
        screen.tick_s = 0  # drive it by hand below
        for _ in range(600):
            w = screen.wizard
            step = w.step if w else None
            for c in range(5):
                feed.set_touch(c, 0)
            if step is not None and step.kind == "touch":
                feed.set_touch(step.channel, 120)
            feed.advance(0.05)
            clock.t_s += 0.05
            app.refresh_now()  # the app's timer polls the link and feeds the session
            screen.tick()
            if screen.outcomes:
                break
        await pilot.pause()
        assert len(screen.outcomes) == 5 and all(o.suggested for o in screen.outcomes)
        assert "hysteresis" in screen_text(app)  # the results table heads
        await pilot.press("A")
        await pilot.pause()
        assert not isinstance(app.screen, CaptureScreen)
        after = [source.settings(c) for c in range(5)]
        assert all(a.threshold_counts == o.suggestion.threshold_counts
                   for a, o in zip(after, screen.outcomes, strict=True))
        assert after != before
        assert not any(source.session.provisional(c) for c in range(5))  # captured: tuned now
        await pilot.press("u")
        await pilot.pause()
        assert [source.settings(c) for c in range(5)] == before
        assert all(source.session.provisional(c) for c in range(5))  # undone: provisional again


async def test_capture_while_recording_leaves_marks_that_tune_uses(tmp_path):
    from processing.recording import read_recording
    from tests.headless.helpers import json_lines, padtune

    feed = SyntheticFeed(noise_counts=2)
    clock = Clock()
    source = SessionSource(feed, port="test://feed", clock=clock)
    app = PadtuneApp(source, ui_hz=0, clock=clock)
    path = tmp_path / "wizard.csv"
    async with app.run_test(size=(100, 32)) as pilot:
        feed.advance(0.5)
        clock.t_s = feed.t_s
        app.refresh_now()
        source.start_recording(path)
        await pilot.press("w")
        await pilot.pause()
        screen = app.screen
        screen.tick_s = 0
        for _ in range(600):
            step = screen.wizard.step if screen.wizard else None
            for c in range(5):
                feed.set_touch(c, 0)
            if step is not None and step.kind == "touch":
                feed.set_touch(step.channel, 120)
            feed.advance(0.05)
            clock.t_s = feed.t_s  # one clock for frames and the recording, as with a real link
            app.refresh_now()
            screen.tick()
            if screen.outcomes:
                break
        await pilot.press("escape")
        await pilot.pause()
        source.stop_recording()
    rec = read_recording(path)
    kinds = [(m.kind, m.channel) for m in rec.marks]
    assert kinds[:2] == [("quiet-start", None), ("quiet-end", None)]
    for name in feed.names:
        assert ("touch-start", name) in kinds and ("touch-end", name) in kinds
    out = padtune("tune", str(path), "-o", str(tmp_path / "w.toml"), "--json")
    assert out.returncode == 0, out.stderr
    result = json_lines(out.stdout)[0]
    assert result["from_marks"] and all(r["suggested"] for r in result["channels"])
    by_name = {o.name: o for o in screen.outcomes}
    for row in result["channels"]:  # the same stretches give about the same touch figure
        assert abs(row["signal"] - by_name[row["name"]].figures.signal_counts) <= 3


async def test_on_a_simulated_board_the_capture_pauses_its_script_and_resumes_it():
    feed = SyntheticFeed(noise_counts=2)
    clock = Clock()
    source = SessionSource(feed, port="sim://greenhouse", clock=clock)
    app = PadtuneApp(source, ui_hz=0, clock=clock)
    async with app.run_test(size=(100, 32)) as pilot:
        feed.advance(0.5)
        app.refresh_now()
        await pilot.press("w")
        await pilot.pause()
        assert isinstance(app.screen, CaptureScreen)
        assert feed.written[-1:] == [b"script off\n"]
        await pilot.press("escape")
        await pilot.pause()
        assert not isinstance(app.screen, CaptureScreen)
        assert feed.written[-1:] == [b"script on\n"]


async def test_a_real_board_gets_no_simulator_commands():
    feed = SyntheticFeed(noise_counts=2)
    source = SessionSource(feed, port="/dev/ttyACM0", clock=Clock())
    app = PadtuneApp(source, ui_hz=0, clock=source.clock)
    async with app.run_test(size=(100, 32)) as pilot:
        feed.advance(0.5)
        app.refresh_now()
        await pilot.press("w")
        await pilot.pause()
        await pilot.press("escape")
        await pilot.pause()
        assert not any(b"script" in w for w in feed.written)


async def test_the_capture_teaches_an_unknown_polarity_and_undo_takes_it_back_too():
    # No profile and a board that does not say which way its counts move (they fall): the capture's
    # touches teach each key's direction; applying is one undoable edit of settings and polarity.
    feed = SyntheticFeed(noise_counts=2, polarity=())
    clock = Clock()
    source = SessionSource(feed, port="test://feed", clock=clock)
    app = PadtuneApp(source, ui_hz=0, clock=clock)
    async with app.run_test(size=(100, 32)) as pilot:
        feed.advance(1.5)
        app.refresh_now()
        before = [source.settings(c) for c in range(5)]
        await pilot.press("w")
        await pilot.pause()
        screen = app.screen
        screen.tick_s = 0
        for _ in range(600):
            w = screen.wizard
            step = w.step if w else None
            for c in range(5):
                feed.set_touch(c, 0)
            if step is not None and step.kind == "touch":
                feed.set_touch(step.channel, -120)
            feed.advance(0.05)
            clock.t_s += 0.05
            app.refresh_now()
            screen.tick()
            if screen.outcomes:
                break
        await pilot.pause()
        assert len(screen.outcomes) == 5 and all(o.suggested for o in screen.outcomes)
        assert screen.wizard.learned == dict.fromkeys(range(5), -1)
        await pilot.press("A")
        await pilot.pause()
        assert source.session.polarity == [-1] * 5
        assert [source.settings(c) for c in range(5)] != before
        await pilot.press("u")
        await pilot.pause()
        assert [source.settings(c) for c in range(5)] == before
        # the session had learned them from the same touches: undo leaves them, as learned
        assert source.session.polarity == [-1] * 5
