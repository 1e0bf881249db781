"""Issue 12, no silent defaults from the live screen: a guided capture that leaves keys without a
suggestion marks them `measured = false` (the rule `padtune tune` uses: `processing.tuning.measured_marks`),
names them, and a save asks first; undo takes the marks back with the settings.

Reference: the profile format's own reader (`load_profile`) and the TOML text as written: the mark is the
line `measured = false` under the key's table, as `tune --partial` writes it (README, profile format).
"""

from __future__ import annotations

from processing.profile import load_profile, profile_for, save_profile
from processing.settings import ChannelSettings
from tests.headless.test_capture_in_app import Clock
from tests.tui.feeds import SyntheticFeed, screen_text
from tests.tui.test_app_actions import files_written
from tui.app import PadtuneApp
from tui.screens.capture import CaptureScreen
from tui.screens.confirm import ConfirmScreen
from tui.screens.prompt import PromptScreen
from tui.session_source import SessionSource

SKIPPED = 2  # zone3: never touched, skipped


async def _capture_skipping(pilot, feed: SyntheticFeed, clock: Clock,
                            skipped: int = SKIPPED) -> CaptureScreen:
    """Open the capture (all keys), touch every key asked for but `skipped`, which is skipped."""
    app = pilot.app
    await pilot.press("w")
    await pilot.pause()
    screen = app.screen
    assert isinstance(screen, CaptureScreen)
    await pilot.press("enter")  # all keys
    screen.tick_s = 0
    for _ in range(800):
        w = screen.wizard
        step = w.step if w else None
        for c in range(5):
            feed.set_touch(c, 0)
        if step is not None and step.kind == "touch":
            if step.channel == skipped:
                screen.action_skip()
            else:
                feed.set_touch(step.channel, 120)
        feed.advance(0.05)
        clock.t_s += 0.05
        app.refresh_now()
        screen.tick()
        if screen.outcomes:
            break
    await pilot.pause()
    assert [o.suggested for o in screen.outcomes] == [c != skipped for c in range(5)]
    return screen


def _words(app: PadtuneApp) -> str:
    """The screen's text with its lines joined (a notice wraps inside its box)."""
    return " ".join(screen_text(app).replace("▌", " ").split())


def _app(feed: SyntheticFeed, clock: Clock, **kw) -> tuple[PadtuneApp, SessionSource]:
    source = SessionSource(feed, port="test://feed", clock=clock, **kw)
    return PadtuneApp(source, ui_hz=0, clock=clock), source


async def test_a_partial_capture_marks_the_skipped_key_names_it_and_the_save_asks_first(tmp_path):
    feed, clock = SyntheticFeed(noise_counts=2), Clock()
    app, source = _app(feed, clock)
    async with app.run_test(size=(100, 32), notifications=True) as pilot:
        feed.advance(1.5)
        app.refresh_now()
        untouched = source.settings(SKIPPED)
        screen = await _capture_skipping(pilot, feed, clock)
        await pilot.press("A")  # names zone3 and applies nothing
        await pilot.pause()
        assert isinstance(app.screen, CaptureScreen) and source.measured(SKIPPED)
        await pilot.press("A")  # the others applied; zone3 keeps its settings, marked
        await pilot.pause()
        assert not isinstance(app.screen, CaptureScreen)
        assert screen.unmeasured() == [SKIPPED]
        assert source.settings(SKIPPED) == untouched
        assert [source.measured(c) for c in range(5)] == [True, True, False, True, True]
        assert source.session.profile.unmeasured() == (SKIPPED,)
        logged = [str(body) for _, body in app.live.log_view.entries]
        assert any("zone3 not measured: marked measured = false" in line for line in logged), logged
        assert any("Not measured: zone3" in n.message for n in app._notifications)  # the notice too
        assert source.unmeasured_news() == ["zone3"]
        await pilot.press("u")  # one undo takes the suggestions and the mark back
        await pilot.pause()
        assert source.measured(SKIPPED) and source.session.profile.unmeasured() == ()
        await pilot.press("U")  # redo: marked again
        await pilot.pause()
        assert not source.measured(SKIPPED)

        out = tmp_path / "panel.toml"
        await pilot.press("s")  # no file yet: first the question, naming the key
        await pilot.pause()
        assert isinstance(app.screen, ConfirmScreen)
        assert "Not measured: zone3" in _words(app) and "marked measured = false" in _words(app)
        await pilot.press("n")  # not saved: nothing written, nothing asked for a name
        await pilot.pause()
        assert not isinstance(app.screen, (ConfirmScreen, PromptScreen)) and not out.exists()
        await pilot.press("s")
        await pilot.pause()
        await pilot.press("y")
        await pilot.pause()
        assert isinstance(app.screen, PromptScreen)
        app.screen.query_one("Input").value = str(out)
        await pilot.press("enter")
        await files_written(pilot)
        saved = load_profile(out)
        assert saved.unmeasured() == (SKIPPED,)
        text = out.read_text()
        zone3 = text[text.index("[channel.zone3]"):]
        assert "measured = false" in zone3.split("\n[")[0]
        assert text.count("measured = false") == 1
        # saved once, the mark is the file's: the next save does not ask again
        await pilot.press("s")
        await files_written(pilot)
        assert not isinstance(app.screen, ConfirmScreen)


async def test_a_key_a_file_held_as_measured_keeps_its_claim_and_a_measured_key_loses_its_mark(tmp_path):
    # As `tune --profile`: a key not measured now keeps the claim the base profile gave it; zone2, marked
    # measured = false in the file, is measured by this capture and loses its mark.
    names = ("zone1", "zone2", "zone3", "zone4", "stop")
    base = profile_for(5, names).with_settings(SKIPPED, ChannelSettings(threshold_counts=60))
    base = base.with_measured(1, False)
    path = tmp_path / "tuned.toml"
    save_profile(base, path)
    feed, clock = SyntheticFeed(noise_counts=2), Clock()
    app, source = _app(feed, clock, profile=load_profile(path), profile_path=path)
    async with app.run_test(size=(100, 32)) as pilot:
        feed.advance(1.5)
        app.refresh_now()
        assert not source.measured(1) and source.measured(SKIPPED)
        await _capture_skipping(pilot, feed, clock)
        await pilot.press("A")
        await pilot.pause()
        await pilot.press("A")
        await pilot.pause()
        assert [source.measured(c) for c in range(5)] == [True] * 5
        assert source.settings(SKIPPED).threshold_counts == 60
        assert source.unmeasured_news() == []
        await pilot.press("s")  # nothing newly marked: written at once
        await files_written(pilot)
        assert load_profile(path).unmeasured() == ()
