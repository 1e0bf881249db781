"""Learning which way a channel's counts move on touch, from its first clear excursion that comes back.

Pure: readings in, a verdict out, no I/O. A `PolarityLearner` starts from the channel's quiet level and
noise (its quiet stretch, `processing.provisional`). It waits for `touch_frames` consecutive readings at
least `threshold` counts on one side of that level (a clear excursion), then for `release_frames`
consecutive readings back within `release` counts of it (the finger lifted). Only then does it decide:
the side the excursion went to is the touch direction. An excursion that has not come back after
`max_out_frames` was no touch (the idle level moved, or a finger was on the key at power-up and has
left): the learner gives up and the caller measures a new quiet level. Why each rule: ALGORITHM.md,
"Polarity learned from the first touch".
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

LEARNED = "learned"
LOST = "lost"


@dataclass(frozen=True, slots=True)
class Verdict:
    """What the learner decided at `row` (an index into the readings it was last fed)."""

    row: int
    outcome: str  # LEARNED (sign is the touch direction) or LOST (no return: measure a quiet level again)
    sign: int  # +1 counts rise on touch, -1 they fall; 0 when LOST
    swing_counts: int  # the largest distance from the quiet level during the excursion


def run_lengths(mask: np.ndarray, carried: int) -> np.ndarray:
    """Length of the run of True ending at each position (0 where False); `carried` Trues came before."""
    idx = np.arange(len(mask))
    last_false = np.maximum.accumulate(np.where(mask, -1, idx))
    runs = idx - last_false
    runs[last_false < 0] += carried
    return np.where(mask, runs, 0)


def first_reaching(runs: np.ndarray, need: int) -> int:
    """The first index where a run reaches `need`, or -1."""
    hits = np.flatnonzero(runs >= need)
    return int(hits[0]) if len(hits) else -1


class PolarityLearner:
    """One channel's learner. `feed(readings)` returns a Verdict at the frame that decides, else None."""

    def __init__(self, level_counts: float, threshold_counts: int, release_counts: int, touch_frames: int,
                 release_frames: int, max_out_frames: int, follow_frames: int) -> None:
        self.level = float(level_counts)
        self.threshold, self.release = int(threshold_counts), int(release_counts)
        self.touch_frames, self.release_frames = max(1, touch_frames), max(1, release_frames)
        self.max_out_frames, self.follow_frames = max(1, max_out_frames), max(1, follow_frames)
        self.sign = 0  # 0 while waiting; the excursion's side once one is under way
        self._up = self._down = self._back = 0  # run lengths carried across blocks
        self._out = 0  # frames since the excursion began
        self.swing = 0
        self._chunk = max(1, self.follow_frames // 8)  # the level follows drift once per chunk
        self._in_chunk, self._quiet_sum, self._quiet_n = 0, 0.0, 0

    def feed(self, readings: np.ndarray) -> Verdict | None:
        """Take the next readings (one channel, oldest first); stop at the first verdict."""
        r = np.asarray(readings, np.int64)
        if len(r) == 0:
            return None
        if self.sign == 0:
            start = self._wait(r)
            if start < 0:
                return None
        else:
            start = 0
        return self._away(r, start)

    def _wait(self, r: np.ndarray) -> int:
        """Look for a clear excursion; returns the row after it is confirmed, or -1. Meanwhile the quiet
        level follows drift, updated at fixed frame counts so the result does not depend on how the
        readings were cut into blocks."""
        pos = 0
        while pos < len(r):
            seg = r[pos:pos + self._chunk - self._in_chunk]
            dev = seg - self.level
            up = run_lengths(dev >= self.threshold, self._up)
            down = run_lengths(dev <= -self.threshold, self._down)
            first_up = first_reaching(up, self.touch_frames)
            first_down = first_reaching(down, self.touch_frames)
            hits = [h for h in (first_up, first_down) if h >= 0]
            if hits:
                row = min(hits)
                self.sign = 1 if row == first_up else -1
                begun = row - self.touch_frames + 1  # may be negative: it began in an earlier segment
                self._out = self.touch_frames
                self.swing = int(np.abs(dev[max(0, begun):row + 1]).max())
                return pos + row + 1
            self._up, self._down = int(up[-1]), int(down[-1])
            quiet = np.abs(dev) < self.release
            self._quiet_sum += float(seg[quiet].sum())
            self._quiet_n += int(quiet.sum())
            self._in_chunk += len(seg)
            pos += len(seg)
            if self._in_chunk == self._chunk:
                self._follow()
        return -1

    def _follow(self) -> None:
        """Pull the quiet level toward the mean of the chunk's quiet readings (a first-order filter with
        a time constant of about follow_frames)."""
        n = self._quiet_n
        if n:
            self.level += (self._quiet_sum / n - self.level) * n / (n + self.follow_frames)
        self._quiet_sum, self._quiet_n, self._in_chunk = 0.0, 0, 0

    def _away(self, r: np.ndarray, start: int) -> Verdict | None:
        """During an excursion: wait for the return (learned) or give up after max_out_frames (lost)."""
        rest = r[start:]
        if len(rest) == 0:
            return None
        dev = rest - self.level
        back = run_lengths(np.abs(dev) < self.release, self._back)
        hit = first_reaching(back, self.release_frames)
        limit = self.max_out_frames - self._out  # rows left before giving up
        if hit >= 0 and hit < limit:
            self.swing = max(self.swing, int(np.abs(dev[:hit + 1]).max()))
            return Verdict(start + hit, LEARNED, self.sign, self.swing)
        if limit <= len(rest):
            row = max(0, limit - 1)
            return Verdict(start + row, LOST, 0, max(self.swing, int(np.abs(dev[:row + 1]).max())))
        self.swing = max(self.swing, int(np.abs(dev).max()))
        self._back = int(back[-1])
        self._out += len(rest)
        return None
