"""SVG snapshots (80x24) of settings travelling to a board: the edit bar with a field the board applied
and one it refused, and the dialog for a board holding other settings than the profile.

Seeded simulated greenhouse board, real decoder, the test's clock: every run draws the same screen.
"""

from __future__ import annotations

from dataclasses import replace

from tests.tui.test_settings_travel import NarrowBoardFeed, run, travel_app
from tui.demo_profile import DEMO_SETTINGS, demo_profile


def test_edit_bar_applied_and_refused(snap_compare) -> None:
    app, feed, _ = travel_app(NarrowBoardFeed(seed=11, settings=True))

    async def before(pilot) -> None:
        run(app, feed, 2.0)
        await pilot.press("right_square_bracket")  # threshold 40: this board takes at most 35
        run(app, feed, 0.2)
        await pilot.press("right", "minus")  # hysteresis 7: applied
        run(app, feed, 0.5)
        await pilot.pause()

    assert snap_compare(app, terminal_size=(80, 24), run_before=before)


def test_board_difference_dialog(snap_compare) -> None:
    tuned = replace(demo_profile("greenhouse"), defaults=replace(DEMO_SETTINGS, threshold_counts=45,
                                                                 touch_debounce_frames=3))
    app, feed, source = travel_app(profile=tuned)
    source._path = None

    async def before(pilot) -> None:
        run(app, feed, 2.0)
        await pilot.pause()

    assert snap_compare(app, terminal_size=(80, 24), run_before=before)
