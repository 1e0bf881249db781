"""A sim:// board through protocol's real Link (reader thread, decoder, bounded hand-over), the way the
app and the headless commands open it, with a key pressed through `Link.write`."""

import time

import numpy as np
import pytest

import devices
from protocol.errors import UserError
from protocol.events import BoardInfo, FrameBlock, LinkState, LinkStatus
from protocol.link import Link

pytestmark = pytest.mark.e2e


def collect(link: Link, seconds: float) -> list:
    out = []
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        time.sleep(0.05)
        out += link.drain()
    return out


def test_link_reads_a_sim_board_and_presses_a_key():
    devices.register_url_handlers()
    link = Link("sim://greenhouse?seed=3&speed=10&script=0&fault=drop:0.05")
    link.start()
    try:
        events = collect(link, 0.6)
        link.write(b"+stop\n")
        collect(link, 0.2)
        pressed = collect(link, 0.4)
    finally:
        link.stop()
    assert any(isinstance(e, LinkStatus) and e.state == LinkState.CONNECTED for e in events)
    info = next(e for e in events if isinstance(e, BoardInfo))
    assert info.board == "greenhouse" and "stop" in info.names
    stop = info.names.index("stop")
    idle = np.concatenate([e.readings for e in events if isinstance(e, FrameBlock)])[:, stop].mean()
    touched = np.concatenate([e.readings for e in pressed if isinstance(e, FrameBlock)])[:, stop].mean()
    assert touched - idle > 40
    s = link.stats
    assert s.garbled == s.bad_checksum == 0
    assert 0.01 < s.lost / (s.frames + s.lost) < 0.12  # 5 % of frames dropped on purpose


def test_link_refuses_an_unknown_sim_board_in_one_line():
    devices.register_url_handlers()
    with pytest.raises(UserError) as err:
        Link("sim://glasshouse").start()
    assert "unknown board 'glasshouse'" in str(err.value) and "\n" not in str(err.value)
