"""Pilot tests of the guided capture screen on a simulated board (no port: the sim feeds a Session)."""

from __future__ import annotations

import numpy as np
from rich.console import Console
from textual.app import App
from textual.widgets import DataTable, ProgressBar

from devices.simulator import SimBoard
from processing.capture import RELEASE, TOUCH
from processing.session import Session
from protocol.decoder import Decoder
from tui.screens.capture import CaptureScreen, outcome_detail

ALL = list(range(9))  # the greenhouse board's keys, chosen beforehand: no choice step


class Clock:
    def __init__(self) -> None:
        self.t_s = 0.0

    def __call__(self) -> float:
        return self.t_s


class Rig:
    """A simulated board, decoder and session; `step()` advances 0.1 s and lets a 'person' react."""

    def __init__(self, ignore: tuple[str, ...] = ()) -> None:
        self.clock = Clock()
        self.board = SimBoard("greenhouse", seed=2, script=False, clock=self.clock)
        self.decoder = Decoder()
        self.session = Session()
        self.ignore = ignore
        self.pressed: str | None = None
        self.screen: CaptureScreen | None = None

    def feed(self) -> None:
        self.session.handle(self.decoder.feed(self.board.run_for(0.1), self.clock.t_s))
        self.clock.t_s += 0.1

    def react(self) -> None:
        w = self.screen.wizard if self.screen else None
        step = w.step if w else None
        want = step.name if step and step.kind == TOUCH and step.name not in self.ignore else None
        if want != self.pressed:
            if self.pressed:
                self.board.press(self.pressed, False)
            if want:
                self.board.press(want, True)
            self.pressed = want


class Host(App[None]):
    def __init__(self, screen: CaptureScreen) -> None:
        super().__init__()
        self.capture = screen
        self.result: dict | None = None

    def on_mount(self) -> None:
        self.push_screen(self.capture, self._done)

    def _done(self, result: dict | None) -> None:
        self.result = result


async def run_capture(rig: Rig, pilot, max_steps: int = 900) -> None:
    for _ in range(max_steps):
        rig.react()
        rig.feed()
        rig.screen.tick()
        if rig.screen.outcomes:
            break
    await pilot.pause()


async def test_wizard_runs_every_step_and_applies_all():
    rig = Rig()
    rig.screen = CaptureScreen(rig.session, clock=rig.clock, tick_s=0, channels=ALL, quiet_s=1.0, hold_s=0.6,
                               timeout_s=3.0)
    app = Host(rig.screen)
    async with app.run_test(size=(100, 36)) as pilot:
        await pilot.pause()
        assert "waiting for frames" in str(rig.screen.query_one("#capture-step").render())
        rig.feed()
        rig.screen.tick()
        assert rig.screen.wizard is not None and rig.screen.wizard.message.startswith("Hands off")
        rig.feed()
        rig.screen.tick()
        assert 0 < rig.screen.query_one(ProgressBar).progress < 100
        await run_capture(rig, pilot)
        screen = rig.screen
        assert len(screen.outcomes) == len(rig.session.names) == 9
        table = screen.query_one(DataTable)
        assert table.row_count == 9
        assert all(o.suggested for o in screen.outcomes if o.name.startswith("zone")), \
            [(o.name, getattr(o.suggestion, "reason", "")) for o in screen.outcomes]
        console = Console(record=True, width=100, color_system=None)
        console.print(outcome_detail(screen.outcomes[0]))
        detail = console.export_text()
        assert "  threshold: " in detail and "threshold_counts" not in detail  # reasons use the labels
        assert "untouched" in detail and "^ threshold" in detail
        shot = app.export_screenshot()
        assert "zone1" in shot and "threshold" in shot
        await pilot.press("A")
        await pilot.pause()
    assert app.result is not None
    applied = {o.channel for o in screen.outcomes if o.suggested}
    assert set(app.result) == applied
    for o in screen.outcomes:
        if o.suggested:
            assert app.result[o.channel].threshold_counts == o.suggestion.threshold_counts
            # the suggested threshold sits between the noise and the typical touch delta
            assert o.figures.noise_pp_counts < o.suggestion.threshold_counts < o.figures.signal_counts


async def test_ignored_key_is_asked_again_then_skipped_and_apply_one():
    rig = Rig(ignore=("zone2",))
    rig.screen = CaptureScreen(rig.session, clock=rig.clock, tick_s=0, channels=ALL, quiet_s=1.0, hold_s=0.5,
                               timeout_s=1.5, max_attempts=2)
    app = Host(rig.screen)
    notices = set()
    async with app.run_test(size=(80, 24)) as pilot:
        for _ in range(900):
            rig.react()
            rig.feed()
            rig.screen.tick()
            if rig.screen.wizard and rig.screen.wizard.notice:
                notices.add(rig.screen.wizard.notice)
            if rig.screen.outcomes:
                break
        await pilot.pause()
        screen = rig.screen
        assert "Nothing happened: touch and hold zone2 (try 2)" in notices
        zone2 = next(o for o in screen.outcomes if o.name == "zone2")
        assert not zone2.suggested and "no touch seen" in zone2.suggestion.reason
        await pilot.press("a")  # the cursor is on zone1
        await pilot.pause()
        assert list(screen.applied) == [0]
        # Apply all: the first A names zone2 (not measured) and applies nothing more; the second applies
        # every suggestion and leaves zone2 as it was.
        await pilot.press("A")
        await pilot.pause()
        assert list(screen.applied) == [0] and screen.is_current
        warning = [n.message for n in app._notifications if "Not measured" in n.message]
        assert warning and "zone2: no touch seen" in warning[-1]
        await pilot.press("A")
        await pilot.pause()
    assert 1 not in app.result and 0 in app.result
    assert set(app.result) == {o.channel for o in screen.outcomes if o.suggested}


async def test_skip_key_moves_on_and_release_step_waits():
    rig = Rig()
    rig.screen = CaptureScreen(rig.session, clock=rig.clock, tick_s=0, channels=ALL, quiet_s=0.5, hold_s=0.5)
    app = Host(rig.screen)
    async with app.run_test(size=(80, 24)) as pilot:
        for _ in range(10):
            rig.feed()
            rig.screen.tick()
        w = rig.screen.wizard
        assert w.step.kind == TOUCH and w.step.name == "zone1"
        await pilot.press("s")
        assert w.step.kind == TOUCH and w.step.name == "zone2"
        rig.react()
        for _ in range(15):
            rig.feed()
            rig.screen.tick()
        assert w.step.kind == RELEASE and w.step.name == "zone2"
        for _ in range(5):  # the finger stays on: the release step must not end
            rig.feed()
            rig.screen.tick()
        assert w.step.kind == RELEASE
        np.testing.assert_array_less(0, len(w.keys[1].touched))


async def test_at_80x24_the_histogram_shows_and_the_reasons_scroll_with_a_hint():
    from tests.tui.feeds import screen_text

    rig = Rig()
    rig.screen = CaptureScreen(rig.session, clock=rig.clock, tick_s=0, channels=ALL, quiet_s=1.0,
                               hold_s=0.5)
    app = Host(rig.screen)
    async with app.run_test(size=(80, 24)) as pilot:
        await run_capture(rig, pilot)
        await pilot.pause()
        assert len(rig.screen.outcomes) == 9
        lines = screen_text(app).splitlines()
        for part in ("untouched ", "touched ", "^ threshold"):  # the selected key's histogram
            assert any(line.lstrip().startswith(part) for line in lines), (part, lines)
        assert "↓ more reasons below: Tab, then ↓ / PgDn" in lines[-2]  # right above the footer
        await pilot.press("tab", "pagedown", "pagedown")  # two pages of detail at 80x24 since issue 12
        await pilot.pause()
        await pilot.pause()
        text = screen_text(app)
        assert "release debounce:" in text and "Tab: back to the table" in text
        await pilot.press("tab", "down")  # back in the table: the next key's detail, from its top
        await pilot.pause()
        await pilot.pause()
        text = screen_text(app)
        assert "\n  zone2\n" in text and "more reasons below" in text, text
