"""Issue 12: the live screen's detail panel shows what a key's SNR verdict rests on (touches, frames).

The wording is checked against the figures themselves (`ChannelQuality`: touches, the noise window's
released frames); thousands are grouped as Python's format spec `,` does (the stdlib's own rule).
"""

from __future__ import annotations

from processing.measure import ChannelQuality, NoiseStats
from tests.tui.test_snapshots import demo_app, settle
from tui.render.quality import verdict_lines


def _quality(verdict: str = "solid", snr: float | None = 14.2, touches: int = 6,
             frames: int = 4800) -> ChannelQuality:
    return ChannelQuality(NoiseStats(1.1, 4.8, frames), 68.0, snr, None if snr is None else snr * 6, verdict,
                          touches, 900)


def test_the_verdict_names_its_touches_and_released_frames_in_the_form_that_fits():
    q = _quality()
    assert verdict_lines(q, 80) == ["solid ✓ SNR 14.2 from 6 touches, 4,800 released frames"]
    assert verdict_lines(q, 42) == ["SNR 14.2 ✓ solid", "from 6 touches, 4,800 released frames"]
    assert verdict_lines(q, 42, lines=1) == ["SNR 14.2 ✓ solid: 6 touches, 4,800 frames"]
    assert f"{4800:,}" == "4,800"  # the stdlib's grouping, the reference for the figure above
    one = _quality("marginal", 7.5, 1, 1)
    assert verdict_lines(one, 80) == ["marginal ~ SNR 7.5 from 1 touch, 1 released frame"]
    none = _quality("unmeasured", None, 0, 120)
    assert verdict_lines(none, 80) == ["unmeasured ? SNR -- from 0 touches, 120 released frames"]
    assert verdict_lines(None, 80) == ["SNR -- ? not measured yet"]
    for width in range(20, 81):  # never wider than asked, never more lines than allowed
        for lines in (1, 2):
            got = verdict_lines(_quality("marginal", 123.4, 12345, 1234567), width, lines)
            assert len(got) <= 2 and all(len(line) <= width for line in got), (width, lines, got)
            if width >= 33:  # the shortest second line fits: two lines only to keep the frames
                assert len(got) <= lines or got[-1].endswith(" frames"), (width, lines, got)


async def test_the_detail_panel_shows_the_selected_keys_verdict_and_what_it_rests_on():
    app = demo_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)  # zone2 held (one touch), the slider touched near dur1
        await pilot.press("down", "d")
        app.advance(0.2)
        await pilot.pause()
        q = app.source.quality(1)
        assert q is not None and q.touches == 1 and q.noise is not None
        shown = str(app.screen.query_one("#detail-settings").render())
        want = f"SNR {q.snr_pp:.1f} ✓ {q.verdict}: 1 touch, {q.noise.samples:,} frames"
        assert want in shown, shown
        await pilot.press("up")  # zone1: never touched, its verdict is unmeasured and says why
        app.advance(0.6)
        await pilot.pause()
        shown = str(app.screen.query_one("#detail-settings").render())
        assert "SNR -- ? unmeasured: 0 touches" in shown, shown


def test_a_held_verdict_says_so_in_every_form():
    from dataclasses import replace

    q = replace(_quality("solid", 9.2, 6, 120), held=True)  # 9.2: marginal by the plain rule, held solid
    assert verdict_lines(q, 80) == ["solid (held) ✓ SNR 9.2 from 6 touches, 120 released frames"]
    assert verdict_lines(q, 42) == ["SNR 9.2 ✓ solid (held)", "from 6 touches, 120 released frames"]
    assert verdict_lines(q, 46, lines=1) == ["SNR 9.2 ✓ solid (held): 6 touches, 120 frames"]
    # too long for one line of 42 (45 cells): two lines rather than leave the frames out
    assert verdict_lines(q, 42, lines=1) == ["SNR 9.2 ✓ solid (held)", "from 6 touches, 120 released frames"]
    for width in range(24, 81):
        assert "(held)" in verdict_lines(q, width, 1)[0], width
