"""The twin check on the live screen: a word in the link strip (whole at 80 columns, like the counters)
and a line in the event log, from a simulated board that sends its own key states and deviates."""

from __future__ import annotations

from devices.faults import FaultPlan
from processing.profile import profile_for
from tests.tui.feeds import SimFeed, log_text
from tui.app import PadtuneApp
from tui.render.link import link_strip
from tui.render.views import LinkView
from tui.session_source import SessionSource

NAMES = ("zone1", "zone2", "zone3", "zone4", "stop", "dur0", "dur1", "dur2", "dur3")
LONG_PORT = "/dev/serial/by-id/usb-Greenhouse_Controls_Irrigation_Touch_Bridge_0123456789ABCDEF-if00-port0"


def test_the_strip_says_nothing_without_states_agrees_or_counts_the_disagreeing_frames():
    view = LinkView(port=LONG_PORT, baud=115200, state="connected", fps=60.0, profile_name="greenhouse.toml",
                    unsaved=True)
    assert "twin" not in link_strip(view, {}, compact=True, width=78).plain
    for twin, word in ((0, "twin agrees"), (1, "twin ≠ 1 frame"), (123456, "twin ≠ 123456 frames")):
        lines = link_strip(LinkView(**{**_fields(view), "twin": twin}), {}, compact=True, width=78).plain
        second = lines.split("\n")[1]
        assert word in second and len(second) <= 78, second
        assert "*unsaved" in second and "rec off" in second  # the profile's name gave way, not these


def _fields(view: LinkView) -> dict:
    return {name: getattr(view, name) for name in view.__slots__}


def twin_app() -> tuple[PadtuneApp, SimFeed]:
    feed = SimFeed(seed=11, faults=FaultPlan.parse(["deviate:zone2@1"]))
    source = SessionSource(feed, port="sim://greenhouse?seed=11&fault=deviate:zone2@1",
                           profile=profile_for(len(NAMES), NAMES, "greenhouse"), clock=lambda: feed.t_s)
    return PadtuneApp(source, ui_hz=0, clock=lambda: feed.t_s), feed


async def _run(pilot, feed: SimFeed, seconds: float) -> None:
    for _ in range(round(seconds / feed.step_s)):
        feed.advance(feed.step_s)
        pilot.app.refresh_now()
    await pilot.pause()


def test_the_strip_and_log_on_the_live_screen(snap_compare) -> None:
    app, feed = twin_app()

    async def before(pilot) -> None:
        await _run(pilot, feed, 2.0)

    assert snap_compare(app, terminal_size=(80, 24), run_before=before)


async def test_the_log_says_the_first_disagreement_and_the_strip_counts():
    app, feed = twin_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await _run(pilot, feed, 0.9)
        assert app.live.source.link_view().twin == 0  # compared, agreeing, before 1 s
        await _run(pilot, feed, 1.1)
        log = log_text(app)
        assert "twin disagrees: zone2 at frame 60 (board seq 60): board confirming, padtune released" in log
        count = app.live.source.link_view().twin
        assert count is not None and count >= 60
