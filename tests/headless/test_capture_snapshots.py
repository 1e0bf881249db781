"""SVG snapshots of the guided capture at 80x24 and 120x40: a step in progress and the results.

A seeded simulated board with no script, a test clock and a simulated person (from
test_capture_screen) make every run draw the same screen. Approve changes with
`pytest tests/headless/test_capture_snapshots.py --snapshot-update` after looking at the SVGs.
"""

from __future__ import annotations

import pytest

from tests.headless.test_capture_screen import Host, Rig
from tui.screens.capture import CaptureScreen

SIZES = [(80, 24), (120, 40)]


def capture_app() -> Host:
    rig = Rig()
    rig.screen = CaptureScreen(rig.session, clock=rig.clock, tick_s=0, quiet_s=1.0, hold_s=0.6,
                               timeout_s=3.0)
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
