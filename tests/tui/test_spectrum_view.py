"""The detail panel's noise spectrum (`f`): while its untouched frames are being collected it says how
many of how many (never an empty plot); once there are enough it draws processing's spectrum.

Same seeded simulated board as `test_snapshots.py`, clock moved by the test. Approve snapshot changes
only after looking at the SVGs.
"""

from __future__ import annotations

import numpy as np
import pytest

from processing.measure import NoiseSpectrum, SpectrumPeak
from tests.tui.feeds import screen_text
from tests.tui.test_snapshots import SIZES, demo_app, settle
from tui.widgets.detail_panel import collecting_lines, detail_title


def spectrum(samples: int, touched: bool = False) -> NoiseSpectrum:
    peak = SpectrumPeak(12.0, 0.4, samples, None, None, None, prominence=2.0)
    empty = np.zeros(0)
    return NoiseSpectrum(empty, empty, samples, 16, 120, 60.0, None if samples < 16 else peak, touched)


def test_collecting_lines_say_how_much_of_what_is_needed() -> None:
    assert collecting_lines(spectrum(9)) == ["noise spectrum: collecting", "untouched frames: 9 of 16",
                                             "0.15 s of 0.27 s needed", "hands off the key"]
    assert collecting_lines(spectrum(0, touched=True))[-1] == "the key is touched: let go"


def test_the_spectrum_title_keeps_the_finding_whole_at_any_width() -> None:
    s = spectrum(9)
    wide = detail_title("zone2", s, 118)
    assert wide == "zone2 noise: collecting 9 of 16 untouched frames (0.15 of 0.27 s): hands off (f: plot)"
    for width in (60, 40, 30):
        title = detail_title("zone2", s, width)
        assert len(title) <= width and "9 of 16" in title, title
    found = spectrum(120)
    assert detail_title("zone2", found, 52) == "zone2 noise: broadband, no tone (12.0 Hz) (f: plot)"


def spectrum_app(release: bool):
    app = demo_app()

    async def before(pilot) -> None:
        await settle(pilot)  # zone2 held
        if release:
            pilot.app.source.press(1, False)
            pilot.app.advance(0.3)  # released, the settle guard passed, not yet 16 untouched frames
        await pilot.press("down", "d", "f")
        pilot.app.advance(0.1)
        await pilot.pause()

    return app, before


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
def test_spectrum_while_collecting(snap_compare, size) -> None:
    app, before = spectrum_app(release=True)
    assert snap_compare(app, terminal_size=size, run_before=before)


async def test_spectrum_of_a_held_key_waits_then_draws_when_enough_frames_came() -> None:
    app, before = spectrum_app(release=False)
    async with app.run_test(size=(120, 40)) as pilot:
        await before(pilot)
        text = screen_text(app)
        assert "the key is touched: let go" in text and "untouched frames: 0 of 16" in text
        assert "-1.0" not in text  # no empty plot's axis
        app.source.press(1, False)
        app.advance(1.5)  # past the app's once-a-second refresh of the spectrum
        await pilot.pause()
        text = screen_text(app)
        assert "collecting" not in text and "Hz per bin" in text
