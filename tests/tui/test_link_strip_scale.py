"""The link strip says a plain form's scale (issue 9): `readings x100` in words, so it reads without colour,
within 80 columns; nothing when the scale is 1. The session source takes it from the `StreamForm`."""

from __future__ import annotations

from protocol.events import BoardInfo, StreamForm
from tests.tui.feeds import SyntheticFeed
from tui.render.link import link_strip
from tui.render.views import LinkView
from tui.session_source import SessionSource


def test_the_strip_shows_the_scale_only_when_it_is_not_1():
    plain = LinkView(port="/dev/ttyACM0", baud=115200, state="connected", fps=100.0)
    assert "readings x" not in link_strip(plain, {}, compact=True, width=78).plain
    scaled = LinkView(port="/dev/ttyACM0", baud=115200, state="connected", fps=100.0, scale=100)
    first = link_strip(scaled, {}, compact=True, width=78).plain.split("\n")[0]
    assert first.endswith("100 fps │ readings x100") and len(first) <= 78
    assert "readings x100" in link_strip(scaled, {}, compact=False).plain


def test_a_long_reason_still_leaves_room_for_the_scale_at_80_cells():
    v = LinkView(port="/dev/ttyUSB0", baud=115200, state="reconnecting", fps=14.0, scale=1000,
                 detail="read failed: device reports readiness to read but returned no data")
    first = link_strip(v, {}, compact=True, width=78).plain.split("\n")[0]
    assert len(first) <= 78 and first.endswith("14 fps │ readings x1000") and "…" in first


def test_the_session_source_follows_the_streams_form():
    feed = SyntheticFeed(names=("zone1", "zone2"))
    source = SessionSource(feed, port="test://feed", clock=lambda: feed.t_s)
    source.poll()
    assert source.link_view().scale == 1
    feed.queue.append(StreamForm(0.1, "pairs", ("zone1", "zone2"), scale=100))
    feed.advance(0.1)
    source.poll()
    assert source.link_view().scale == 100
    feed.queue.append(BoardInfo(0.2, {"proto": "1"}, proto=1, new_session=True))  # a restarted board
    source.poll()
    assert source.link_view().scale == 1
