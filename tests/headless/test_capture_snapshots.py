"""SVG snapshots of the guided capture at 80x24 and 120x40: the choice of keys, a step in progress and
the results (the selected key's histogram on screen at both sizes).

Frames come from seeded numpy noise with touches added by a simulated person (not from the board
simulator, whose physics may change), and a test clock, so every run draws the same screen. Approve
changes with `pytest tests/headless/test_capture_snapshots.py --snapshot-update` after looking.
"""

from __future__ import annotations

import numpy as np
import pytest

from processing.capture import TOUCH
from processing.groups import GroupSpec
from processing.profile import Profile
from processing.session import Session
from processing.slider import SliderSpec
from protocol.events import BoardInfo, FrameBlock
from tests.headless.test_capture_screen import Clock, Host
from tests.tui.feeds import screen_text
from tui.screens.capture import CaptureScreen

SIZES = [(80, 24), (120, 40)]
NAMES = ("zone1", "zone2", "zone3", "zone4", "stop")
RATE_HZ = 50.0


class SyntheticRig:
    """Seeded frames (baseline, noise, a little crosstalk) and a person who does as asked."""

    def __init__(self) -> None:
        self.clock = Clock()
        profile = Profile(names=NAMES, groups=(GroupSpec("zones", (0, 1, 2, 3)),),
                          sliders=(SliderSpec("dial", (1, 2, 3)),))
        self.session = Session(profile)
        self.rng = np.random.default_rng(21)
        self.index = 0
        self.touch = np.zeros(len(NAMES))
        self.screen: CaptureScreen | None = None
        self.session.handle([BoardInfo(0.0, {}, proto=1, channels=len(NAMES), rate_hz=RATE_HZ, names=NAMES,
                                       polarity=(1,), new_session=True)])

    def react(self) -> None:
        w = self.screen.wizard if self.screen else None
        step = w.step if w else None
        self.touch[:] = 0
        if step is not None and step.kind == TOUCH:
            self.touch[step.channel] = 80 + 10 * step.channel
            self.touch[(step.channel + 1) % len(NAMES)] = 3  # crosstalk to the neighbour

    def feed(self) -> None:
        n = round(0.1 * RATE_HZ)
        base = np.array([1400, 1410, 1390, 1405, 1650])
        readings = (base + self.touch + self.rng.normal(0, 2.0, (n, len(NAMES)))).round().astype(np.int64)
        t = self.clock.t_s + np.arange(1, n + 1) / RATE_HZ
        self.session.handle([FrameBlock(t, np.arange(self.index, self.index + n), readings, self.index)])
        self.index += n
        self.clock.t_s = float(t[-1])


def capture_app(choose: bool = False) -> Host:
    rig = SyntheticRig()
    chosen = {} if choose else {"channels": list(range(len(NAMES)))}
    rig.screen = CaptureScreen(rig.session, clock=rig.clock, tick_s=0, quiet_s=1.0, hold_s=0.6,
                               timeout_s=3.0, selected=2, **chosen)
    app = Host(rig.screen)
    app.rig = rig  # type: ignore[attr-defined]
    return app


def steps(app: Host, n: int) -> None:
    rig = app.rig  # type: ignore[attr-defined]
    for _ in range(n):
        rig.react()
        rig.feed()
        rig.screen.tick()
        if rig.screen.outcomes:
            return


@pytest.mark.parametrize("size", SIZES, ids=["80x24", "120x40"])
def test_capture_step(snap_compare, size) -> None:
    async def before(pilot) -> None:
        steps(pilot.app, 16)  # hands off done, zone1 being held
        await pilot.pause()

    assert snap_compare(capture_app(), terminal_size=size, run_before=before)


@pytest.mark.parametrize("size", SIZES, ids=["80x24", "120x40"])
def test_capture_results(snap_compare, size) -> None:
    async def before(pilot) -> None:
        steps(pilot.app, 900)
        await pilot.pause()
        await pilot.press("down")
        await pilot.pause()

    assert snap_compare(capture_app(), terminal_size=size, run_before=before)


@pytest.mark.parametrize("size", SIZES, ids=["80x24", "120x40"])
def test_capture_choice_of_keys(snap_compare, size) -> None:
    async def before(pilot) -> None:
        steps(pilot.app, 1)  # the board's names are known: the choices are filled
        await pilot.pause()
        await pilot.press("down", "down")  # group zones highlighted
        await pilot.pause()

    assert snap_compare(capture_app(choose=True), terminal_size=size, run_before=before)


@pytest.mark.parametrize("size", SIZES, ids=["80x24", "120x40"])
async def test_the_results_histogram_is_on_screen(size) -> None:
    app = capture_app()
    async with app.run_test(size=size) as pilot:
        steps(app, 900)
        await pilot.pause()
        await pilot.pause()
        text = screen_text(app)
        lines = text.splitlines()
        for part in ("untouched ", "touched ", "^ threshold"):  # the selected key's histogram
            assert any(line.lstrip().startswith(part) for line in lines), (part, text)
        # five keys: at 120x40 the crosstalk, touched noise and reasons fit below the histogram, so no
        # hint is shown; at 80x24 (since issue 12's lines) they scroll, with the hint right above the footer
        if size == (120, 40):
            assert "release debounce:" in text and "more reasons" not in text
        else:
            assert "↓ more reasons below: Tab, then ↓ / PgDn" in lines[-2]
