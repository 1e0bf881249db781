"""The capture screen opened from the live app's `w` key, applied as one undoable edit."""

from __future__ import annotations

import numpy as np

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
        await pilot.press("enter")  # the first choice: all keys
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
        await pilot.press("enter")  # all keys
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
        await pilot.press("enter")  # all keys
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


# ---------------------------------------------------------------- the capture's own keys and key choice


class PressFeed(SyntheticFeed):
    """A synthetic board that takes the simulator's `+NAME` / `-NAME` presses (120 counts of touch)."""

    def write(self, data: bytes) -> bool:
        super().write(data)
        text = data.decode("ascii").strip()
        if text[:1] in "+-" and text[1:] in self.names:
            self.set_touch(self.names.index(text[1:]), 120 if text[0] == "+" else 0)
        return True


def pressed(feed: SyntheticFeed) -> list[str]:
    return [w.decode().strip() for w in feed.written if w[:1] in b"+-"]


def sim_app() -> tuple[PadtuneApp, PressFeed, Clock]:
    feed = PressFeed(noise_counts=2)
    clock = Clock()
    source = SessionSource(feed, port="sim://greenhouse", clock=clock)
    return PadtuneApp(source, ui_hz=0, clock=clock), feed, clock


async def drive(app: PadtuneApp, feed: SyntheticFeed, clock: Clock, pilot, until, max_steps: int = 600,
                on_step=None) -> None:
    """Move the board and the clock 50 ms at a time, the app's timer and the capture's tick by hand,
    until `until(screen)`; `on_step(screen)` may press keys between steps."""
    screen = app.screen
    for _ in range(max_steps):
        if until(screen):
            return
        if on_step is not None:
            await on_step(screen)
        feed.advance(0.05)
        clock.t_s = feed.t_s
        app.refresh_now()
        screen.tick()
    raise AssertionError(f"not reached: {screen.wizard.message if screen.wizard else 'no wizard'}")


async def open_and_type(app: PadtuneApp, feed: SyntheticFeed, clock: Clock, pilot,
                        keys: str) -> CaptureScreen:
    feed.advance(0.5)
    clock.t_s = feed.t_s
    app.refresh_now()
    await pilot.press("w")
    await pilot.pause()
    screen = app.screen
    assert isinstance(screen, CaptureScreen) and screen.choosing
    screen.tick_s = 0
    await pilot.press("tab", *keys, "enter")
    await pilot.pause()
    return screen


async def test_p_and_t_press_the_key_the_capture_asks_for_not_the_selected_one():
    app, feed, clock = sim_app()
    async with app.run_test(size=(100, 32)) as pilot:
        await pilot.press("down")  # zone2 selected in the live screen
        screen = await open_and_type(app, feed, clock, pilot, "3,stop")
        assert list(screen.wizard.keys) == [2, 4] and not screen.choosing
        await pilot.press("p")  # hands off: no key is asked for yet, nothing pressed
        await drive(app, feed, clock, pilot, lambda s: s.wizard.step.kind == "touch")
        assert pressed(feed) == []
        await pilot.press("t")  # touch zone3 until its step is done, then let go
        await drive(app, feed, clock, pilot, lambda s: s.wizard.step.name == "stop")
        assert pressed(feed) == ["+zone3", "-zone3"]
        await pilot.press("p")  # hold stop ...
        await drive(app, feed, clock, pilot, lambda s: s.wizard.step.kind == "release")
        assert pressed(feed)[-1] == "+stop"
        await pilot.press("p")  # ... and let go when asked
        await drive(app, feed, clock, pilot, lambda s: bool(s.outcomes))
        assert pressed(feed) == ["+zone3", "-zone3", "+stop", "-stop"]  # never zone2, the selected one
        assert [o.name for o in screen.outcomes] == ["zone3", "stop"]
        assert all(o.suggested for o in screen.outcomes)
        await pilot.press("p")  # the results: the board's keys are off
        assert len(pressed(feed)) == 4


async def test_digits_hold_any_key_and_closing_lets_go_of_what_the_capture_holds():
    app, feed, clock = sim_app()
    async with app.run_test(size=(100, 32)) as pilot:
        await open_and_type(app, feed, clock, pilot, "1-2")
        await pilot.press("p", "t")  # hands off: no key is asked for, nothing is pressed
        await drive(app, feed, clock, pilot, lambda s: s.wizard.progress > 0.3)
        await pilot.press("4")  # a finger on zone4 during hands off: the step is measured again
        await drive(app, feed, clock, pilot, lambda s: "moved during hands off" in s.wizard.notice)
        await pilot.press("4")
        await drive(app, feed, clock, pilot, lambda s: s.wizard.step.kind == "touch")
        await pilot.press("p")  # zone1 held; then the capture is closed mid-step
        await drive(app, feed, clock, pilot, lambda s: s.wizard.progress > 0.3)
        await pilot.press("escape")
        await pilot.pause()
        assert not isinstance(app.screen, CaptureScreen)
    assert pressed(feed) == ["+zone4", "-zone4", "+zone1", "-zone1"]


async def test_the_keys_are_chosen_from_a_list_or_typed_and_a_mistake_is_one_line():
    from processing.groups import GroupSpec
    from processing.profile import Profile

    feed = PressFeed(noise_counts=2)
    clock = Clock()
    profile = Profile(names=feed.names, groups=(GroupSpec("zones", (0, 1, 2, 3)),))
    source = SessionSource(feed, port="sim://greenhouse", clock=clock, profile=profile)
    app = PadtuneApp(source, ui_hz=0, clock=clock)
    async with app.run_test(size=(80, 24)) as pilot:
        feed.advance(0.5)
        app.refresh_now()
        await pilot.press("down", "down", "w")  # zone3 selected
        await pilot.pause()
        await pilot.press("p", "t", "3")  # the list of choices: the board's keys press nothing
        text = screen_text(app)
        assert "all 5 keys" in text and "11 steps" in text and "zone1-stop" in text
        assert "the selected key, zone3" in text and "group zones" in text and "zone1-zone4" in text
        await pilot.press("down", "enter")  # the selected key
        await pilot.pause()
        assert list(app.screen.wizard.keys) == [2] and "step 1 of 3: zone3" in screen_text(app)
        await pilot.press("escape")
        await pilot.pause()
        await pilot.press("w")
        await pilot.pause()
        await pilot.press("down", "down", "enter")  # the group
        await pilot.pause()
        assert list(app.screen.wizard.keys) == [0, 1, 2, 3]
        await pilot.press("escape")
        await pilot.pause()
        await pilot.press("w")
        await pilot.pause()
        screen = app.screen
        await pilot.press("tab", *"zone9", "enter")
        await pilot.pause()
        assert screen.choosing and screen.wizard is None
        assert "no key 'zone9'" in screen_text(app)
        await pilot.press("ctrl+u", *"2 - 3, ZONES", "enter")
        await pilot.pause()
        assert not screen.choosing and list(screen.wizard.keys) == [1, 2, 0, 3]
    assert pressed(feed) == []  # typing names with p and t in them pressed nothing


async def test_a_restarted_hands_off_step_writes_balanced_marks_read_back_from_the_recording(tmp_path):
    from processing.recording import read_recording
    from tests.headless.helpers import json_lines, padtune
    from tests.processing.tune_reference import find_touches

    app, feed, clock = sim_app()
    path = tmp_path / "restarted.csv"
    async with app.run_test(size=(100, 32)) as pilot:
        app.source.start_recording(path)
        await open_and_type(app, feed, clock, pilot, "zone1-zone2")
        await drive(app, feed, clock, pilot, lambda s: s.wizard.progress > 0.5)
        await pilot.press("2")  # a finger lands on zone2 half way through hands off ...
        await drive(app, feed, clock, pilot, lambda s: "moved during hands off" in s.wizard.notice)
        await pilot.press("2")  # ... and leaves: hands off is measured again

        async def touch_when_asked(screen) -> None:
            step = screen.wizard.step
            if step is not None and step.kind == "touch" and step.channel not in screen.held:
                await pilot.press("t")

        await drive(app, feed, clock, pilot, lambda s: bool(s.outcomes), on_step=touch_when_asked)
        await pilot.press("escape")
        await pilot.pause()
        app.source.stop_recording()
    rec = read_recording(path)
    marks = [(m.kind, m.channel) for m in rec.marks]
    assert marks == [("quiet-start", None), ("quiet-end", None), ("quiet-start", None), ("quiet-end", None),
                     ("touch-start", "zone1"), ("touch-end", "zone1"),
                     ("touch-start", "zone2"), ("touch-end", "zone2")]
    assert "zone2 moved" in rec.marks[1].text
    # The stretches read back as quiet hold no touch: zone2's untouched deltas stay within its noise.
    frames = [e for e in rec.events if hasattr(e, "readings")]
    t_s = np.concatenate([b.t_s for b in frames])
    readings = np.concatenate([b.readings for b in frames])
    traces = find_touches(t_s, readings, feed.names, (1,), feed.rate_hz, rec.marks)
    assert np.ptp(traces[1].quiet) <= 4 * feed.noise + 2  # seeded integer noise of +-2 counts, no 120
    out = padtune("tune", str(path), "-o", str(tmp_path / "t.toml"), "--json", "--partial")
    assert out.returncode == 0, out.stderr  # only some keys were captured: --partial marks the others
    assert "zone2" not in json_lines(out.stdout)[0]["unmeasured"]
    rows = {r["name"]: r for r in json_lines(out.stdout)[0]["channels"]}
    assert rows["zone2"]["suggested"] and rows["zone2"]["noise_pp"] <= 4 * feed.noise + 2
