"""Load test: the 64-channel board at 1 kHz through the real link and the running app for a few seconds.

The screen timer runs for real here (20 Hz) while the link's reader thread decodes the simulated
board. Nothing may be lost on the app's side (the link's hand-over queue never overflows and the
board never has to drop frames for a slow reader), the screen keeps drawing, and a key press is
answered while it all runs. No timing is asserted beyond "the app kept up".
"""

from __future__ import annotations

import asyncio
import time

import devices
from protocol.link import Link
from tui.app import PadtuneApp
from tui.session_source import SessionSource


async def test_grid64_at_1khz_loses_nothing_and_answers_keys() -> None:
    devices.register_url_handlers()
    link = Link("sim://grid64?seed=3", 921600)
    link.start()
    source = SessionSource(link, port="sim://grid64?seed=3", baud=921600)
    app = PadtuneApp(source, ui_hz=20)
    try:
        async with app.run_test(size=(120, 40)) as pilot:
            t0 = time.monotonic()
            while not source.channel_names() and time.monotonic() - t0 < 5:
                await asyncio.sleep(0.05)
            assert len(source.channel_names()) == 64
            frames0, drawn0 = link.stats.frames, app.frames_drawn
            await asyncio.sleep(3.0)
            before = source.settings(0).threshold_counts
            await pilot.press("plus")
            assert source.settings(0).threshold_counts == before + 1  # answered at once, not queued
            await pilot.press("end")
            await asyncio.sleep(0.2)
            cursor = app.live.cursor
            elapsed = time.monotonic() - t0
            stats = link.stats
            drawn = app.frames_drawn - drawn0
    finally:
        link.stop()
    assert stats.overflow == 0, "the app left frames in the link's queue until it overflowed"
    assert stats.lost == 0, "the board had to drop frames: the reader fell behind"
    assert stats.frames - frames0 >= 0.8 * 1000 * 3.0  # the board's rate, give or take start-up
    assert drawn >= 20 * 3.0 * 0.5, f"only {drawn} screen frames in {elapsed:.1f} s"
    assert cursor == 63
