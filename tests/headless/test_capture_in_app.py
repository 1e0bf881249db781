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
        feed.advance(0.5)
        app.refresh_now()
        before = [source.settings(c) for c in range(5)]
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
        assert "SNR pp" in screen_text(app)
        await pilot.press("A")
        await pilot.pause()
        assert not isinstance(app.screen, CaptureScreen)
        after = [source.settings(c) for c in range(5)]
        assert all(a.threshold_counts == o.suggestion.threshold_counts
                   for a, o in zip(after, screen.outcomes, strict=True))
        assert after != before
        await pilot.press("u")
        await pilot.pause()
        assert [source.settings(c) for c in range(5)] == before
