"""When the live screen draws: a screen frame per period, and one at once after a detection.

The screen timer polls the source a few times per screen frame (`polls_per_frame`); each poll runs
detection on what the link brought. A frame is drawn once a period, and also at the first poll that
brought a detection once half a period has passed since the last frame, so a touch shows about a
poll after its frame arrived instead of waiting for the next fixed frame (up to a whole period: 50 ms
at 20 Hz). A frame drawn early moves the next regular one a period on, so the screen keeps its rate;
a flood of detections (a board resetting, a chattering key) costs at most twice the frames. Frames
stay at least half a period apart, longer than Textual's own update interval (1/60 s), so the
compositor paints each at once instead of on its next tick. Pure: the caller passes the time.
"""

from __future__ import annotations


class FramePacer:
    """Decides after each poll whether this poll draws a screen frame."""

    def __init__(self, frames_hz: float, polls_per_frame: int) -> None:
        self.period_s = 1.0 / frames_hz
        self.poll_s = self.period_s / polls_per_frame
        self.drawn_s = -1e9  # when the last frame was drawn
        self.waiting = False  # a poll brought detections that no frame has shown yet

    def after_poll(self, now_s: float, detections: bool) -> bool:
        """True when the poll that just ran (at `now_s`, bringing `detections` or not) should draw."""
        self.waiting = self.waiting or detections
        since_s = now_s - self.drawn_s
        # The timer's ticks jitter: a regular frame is on time half a poll early; a frame after a
        # detection needs half a period since the last (a quarter of a poll early is close enough).
        due = since_s >= self.period_s - self.poll_s / 2
        if due or (self.waiting and since_s >= self.period_s / 2 - self.poll_s / 4):
            self.drawn_s, self.waiting = now_s, False
            return True
        return False
