"""The screen timer's pacing: a frame per period, one at once after a detection, never a flood of frames."""

from __future__ import annotations

import random
from itertools import pairwise

from tui.pacing import FramePacer


def run(pacer: FramePacer, polls: int, poll_s: float, detect: set[int] = frozenset(),
        jitter_s: float = 0.0, seed: int = 1) -> list[int]:
    """Poll `polls` times, `poll_s` apart (each tick up to `jitter_s` late); the polls that drew."""
    rng = random.Random(seed)
    return [i for i in range(polls) if pacer.after_poll(i * poll_s + rng.uniform(0, jitter_s), i in detect)]


def test_a_frame_every_period_whatever_the_timer_jitter():
    # 20 frames a second, polled twice a frame (every 25 ms), each tick up to 5 ms late
    drawn = run(FramePacer(20.0, 2), 400, 0.025, jitter_s=0.005)
    assert drawn == list(range(0, 400, 2))  # 20 frames a second, none skipped, none extra


def test_a_detection_is_drawn_at_the_poll_that_brings_it():
    drawn = run(FramePacer(20.0, 2), 12, 0.025, detect={3, 8})
    # poll 3 (75 ms) draws at once instead of at poll 4; the regular frames go on from there
    assert drawn == [0, 2, 3, 5, 7, 8, 10]


def test_frames_stay_half_a_period_apart_when_polled_faster():
    # three polls a frame (every 16.7 ms): a detection one poll after a frame waits one more poll, so
    # frames are never closer than half a period (Textual paints at most every 1/60 s anyway)
    drawn = run(FramePacer(20.0, 3), 12, 0.05 / 3, detect={1, 7})
    assert drawn == [0, 2, 5, 7, 10]
    assert min(b - a for a, b in pairwise(drawn)) * 0.05 / 3 >= 0.025


def test_a_flood_of_detections_costs_at_most_twice_the_frames():
    for polls_per_frame in (2, 3, 4):
        poll_s = 0.05 / polls_per_frame
        drawn = run(FramePacer(20.0, polls_per_frame), 40 * polls_per_frame, poll_s, detect=set(range(1000)),
                    jitter_s=poll_s / 5)
        assert 40 < len(drawn) <= 2 * 40  # 40 periods: more than the regular frames, at most two each


def test_random_detections_keep_the_frame_rate_and_show_within_a_poll_or_two():
    pacer, poll_s = FramePacer(20.0, 2), 0.025
    rng = random.Random(4)
    detect = {i for i in range(4000) if rng.random() < 0.1}
    drawn = run(pacer, 4000, poll_s, detect=detect, jitter_s=0.004)
    seconds = 4000 * poll_s
    assert 20 * seconds <= len(drawn) <= 25 * seconds
    drawn_set = set(drawn)
    assert all(i in drawn_set or i + 1 in drawn_set for i in detect)  # shown at once, or one poll later
