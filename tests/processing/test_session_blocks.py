"""Several frame blocks handed to the session at once (a screen frame's worth of reads) give exactly what
one block per call gives: the session joins runs that continue one another and keeps every other cut."""

from __future__ import annotations

import random

import numpy as np

from processing.session import Session, _joined
from protocol.events import BoardInfo, FrameBlock

from .test_first_contact import stream, touch


def block(first: int, n: int, channels: int = 2, board_time: bool = False) -> FrameBlock:
    idx = np.arange(first, first + n)
    return FrameBlock(idx / 100.0, idx.copy(), np.full((n, channels), 1000, np.int64), first,
                      idx * 10 if board_time else None)


def test_runs_that_continue_are_joined_and_nothing_else():
    info = BoardInfo(0.0, {}, proto=1, channels=2, new_session=True)
    events = [block(0, 5), block(5, 3), info, block(8, 2), block(20, 4), block(24, 1, channels=3),
              block(25, 2, channels=3, board_time=True), block(27, 2, channels=3, board_time=True)]
    out = list(_joined(events))
    shape = [(e.first_index, len(e), e.channels) if isinstance(e, FrameBlock) else "info" for e in out]
    # a gap in the frame numbers (lost frames), another width and a time column that starts all cut a run
    assert shape == [(0, 8, 2), "info", (8, 2, 2), (20, 4, 2), (24, 1, 3), (25, 4, 3)]
    joined = out[0]
    assert joined.t_s.tolist() == [i / 100.0 for i in range(8)] and joined.seq.tolist() == list(range(8))
    assert out[-1].board_time.tolist() == [250, 260, 270, 280]
    lone = block(0, 5)
    assert list(_joined([lone])) == [lone] and next(iter(_joined([lone]))) is lone  # passed through as is


def test_same_detections_whether_blocks_come_one_by_one_or_many_per_call():
    r = stream(3, 8.0, [1000, 3000, 72], seed=9)
    touch(r, 0, 2.5, 3.0, -200)
    touch(r, 1, 4.0, 4.6, 300)
    touch(r, 2, 3.5, 3.9, 40)
    touch(r, 2, 6.0, 6.5, 40)
    touch(r, 0, 5.0, 5.5, -200)
    touch(r, 1, 6.6, 7.2, 300)  # each key's first touch teaches its direction; the second is reported
    rng = random.Random(5)
    blocks, pos = [], 0
    while pos < len(r):
        n = rng.choice([1, 2, 5, 11, 40])
        rows = r[pos:pos + n]
        idx = pos + np.arange(len(rows))
        blocks.append(FrameBlock(idx / 100.0, np.full(len(rows), -1), rows, pos))
        pos += len(rows)

    def run(group_sizes: list[int]) -> tuple[list[tuple[str, int, int]], Session]:
        s, got, i = Session(), [], 0
        while i < len(blocks):
            k = group_sizes[i % len(group_sizes)]
            got += [(type(d).__name__, d.channel, d.index) for d in s.handle(blocks[i:i + k])]
            i += k
        return got, s

    one, s1 = run([1])
    many, s2 = run([3, 7, 1, 12])
    assert one == many
    assert [d[1] for d in one if d[0] == "Touch"] == [0, 2, 1]
    assert s1.engine.deltas == s2.engine.deltas and s1.polarity == s2.polarity
    assert s1.profile == s2.profile
    assert [q.noise for q in s1.measures.qualities()] == [q.noise for q in s2.measures.qualities()]
