"""The live screen on a board that says nothing, or too much: the link strip follows the link's own
2 s rule (`SILENT` for no bytes at all, `NO FRAMES` for bytes that are not frames, a board that never
sent a frame too), and a flood of one link fault or notice is a few counted lines in the log."""

from __future__ import annotations

import time

import pytest

from protocol.events import FaultKind, LinkFault, LinkState, LinkStatus
from protocol.link import Link
from tests.protocol.ptyboard import PtyBoard
from tests.tui.feeds import SyntheticFeed, log_text, screen_text
from tui.app import PadtuneApp
from tui.session_source import SessionSource


class QuietFeed(SyntheticFeed):
    """A feed that connects and then only sends what the test queues (no info line, no frames)."""

    def __init__(self) -> None:
        super().__init__()
        self.queue = [LinkStatus(0.0, LinkState.CONNECTED, "test://quiet")]


def make(feed: SyntheticFeed) -> PadtuneApp:
    source = SessionSource(feed, port="test://quiet", clock=lambda: feed.t_s)
    return PadtuneApp(source, ui_hz=0, clock=lambda: feed.t_s)


def tick(app: PadtuneApp, feed: SyntheticFeed, seconds: float, step_s: float = 0.1) -> None:
    for _ in range(round(seconds / step_s)):
        feed.t_s += step_s
        app.refresh_now()


async def test_a_board_that_never_sends_a_frame_is_flagged_like_one_that_stopped() -> None:
    feed = QuietFeed()
    app = make(feed)
    async with app.run_test():
        tick(app, feed, 1.5)
        assert "NO FRAMES" not in screen_text(app) and "SILENT" not in screen_text(app)
        tick(app, feed, 1.5)
        assert "connected, NO FRAMES for 3 s" in screen_text(app)
        assert app.query_one("#table").has_class("-stale")


async def test_the_links_silent_event_shows_as_silent_until_bytes_come_again() -> None:
    feed = QuietFeed()
    app = make(feed)
    async with app.run_test():
        tick(app, feed, 2.0)
        feed.queue.append(LinkFault(feed.t_s, FaultKind.SILENT, 2, "test://quiet has sent nothing in the "
                                    "2 s since it opened (never spoke)"))
        tick(app, feed, 0.5)
        assert "connected, SILENT for 2 s" in screen_text(app)
        assert "⚠ link: silent (test://quiet has sent nothing" in log_text(app)
        feed._stats.bytes_in += 40  # text arrives, but no frame: the board talks, unreadably
        tick(app, feed, 0.2)
        assert "connected, NO FRAMES for 2 s" in screen_text(app)
        feed.advance(0.1)  # frames: all clear
        app.refresh_now()
        assert "NO FRAMES" not in screen_text(app) and "SILENT" not in screen_text(app)


async def test_a_flood_of_one_fault_is_a_few_counted_log_lines() -> None:
    feed = SyntheticFeed()
    app = make(feed)
    async with app.run_test():
        tick(app, feed, 0.1)
        for _ in range(30):  # 3 s of a board resetting 100 times a tick
            feed.queue += [LinkFault(feed.t_s, FaultKind.RESET, 1, "seq 5 -> 5") for _ in range(100)]
            feed.advance(0.1)
            app.refresh_now()
        tick(app, feed, 1.2)
        text = log_text(app)
        assert 2 <= text.count("⚠ link: reset") <= 5, text
        assert "(x" in text
        for line in ("board reset: baselines taken again", "~ re-baselined all channels"):
            assert 2 <= text.count(line) <= 5, text


@pytest.mark.e2e
async def test_a_real_link_on_a_board_that_never_speaks_shows_silent(tmp_path) -> None:
    board = PtyBoard(tmp_path)
    link = Link(str(board.path))
    link.start()
    source = SessionSource(link, port=str(board.path))
    app = PadtuneApp(source, ui_hz=0)
    try:
        async with app.run_test():
            deadline = time.monotonic() + 30
            while "connected, SILENT for" not in screen_text(app):
                assert time.monotonic() < deadline, screen_text(app)[:200]
                app.refresh_now()
                time.sleep(0.05)
            assert "never spoke" in log_text(app)
    finally:
        link.stop()
        board.close()
