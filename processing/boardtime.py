"""The frame rate from a board's own time column (`FrameBlock.board_time`), when it has one.

A board that prints `millis()` (or `micros()`, or seconds with decimals) in front of its readings
stamps every frame on its own clock. Its ticks have no stated unit: the unit is the power of ten of
ticks per second (1 for seconds .. 10^6 for microseconds) nearest to the ticks per host second
measured over at least MIN_SPAN_S of host time, and only if it lies within a factor UNIT_TOLERANCE of
it. The frame period then comes from the board's ticks alone (`frame_period`). Arrival times on the
host come in bursts (USB packets, OS scheduling), so the board's clock gives the rate sooner and
without the error lost frames put into a count over host time. ALGORITHM.md, "Frame rate".
"""

from __future__ import annotations

import math

import numpy as np

MIN_SPAN_S = 1.0  # host time the ticks are compared over before the unit is decided
MIN_TICKS = 16
UNIT_TOLERANCE = 1.25  # measured ticks per second within this factor of a power of ten
UNIT_NAMES = {0: "s", 1: "1/10 s", 2: "1/100 s", 3: "ms", 4: "1/10000 s", 5: "1/100000 s", 6: "us"}
MAX_TICKS = 4096
WINDOW = 64


class BoardClock:
    """Collects (board tick, host time) pairs until the rate can be told; then `rate_hz` is set."""

    def __init__(self) -> None:
        self._reset()

    def _reset(self) -> None:
        self.rate_hz: float | None = None
        self.unit: str | None = None  # e.g. "ms"
        self.ticks_per_s: int | None = None
        self.refused: str | None = None  # why the column cannot be used (no power-of-ten unit fits)
        self._ticks: list[np.ndarray] = []  # the first MAX_TICKS board times
        self._count = 0
        self._first: tuple[int, float] | None = None
        self._last: tuple[int, float] | None = None

    @property
    def decided(self) -> bool:
        return self.rate_hz is not None or self.refused is not None

    def observe(self, ticks: np.ndarray, t_s: np.ndarray) -> bool:
        """Take a block's board times and host times; True when this call decided the rate (or refused)."""
        if self.decided or len(ticks) == 0:
            return False
        ticks = np.asarray(ticks, np.int64)
        if self._last is not None and int(ticks[0]) < self._last[0]:  # went back: the board restarted
            self._reset()
        if self._count < MAX_TICKS:
            self._ticks.append(ticks[:MAX_TICKS - self._count])
            self._count += len(self._ticks[-1])
        if self._first is None:
            # Frames that arrived in one read share the host time at which its last byte came (a first
            # read may hold a backlog of many frames): only the last of them matches that time.
            k = int(np.searchsorted(t_s, t_s[0], side="right")) - 1
            self._first = (int(ticks[k]), float(t_s[k]))
        self._last = (int(ticks[-1]), float(t_s[-1]))
        return self._decide()

    def _decide(self) -> bool:
        assert self._first is not None and self._last is not None
        host_span = self._last[1] - self._first[1]
        if host_span < MIN_SPAN_S or self._count < MIN_TICKS:
            return False
        measured = (self._last[0] - self._first[0]) / host_span
        if measured <= 0:
            self.refused = "it does not advance"
            return True
        k = min(range(7), key=lambda e: abs(math.log10(measured) - e))
        if abs(math.log10(measured) - k) > math.log10(UNIT_TOLERANCE):
            self.refused = (f"about {measured:.6g} ticks per second, no power of ten from seconds to "
                            "microseconds")
            return True
        period = frame_period(np.concatenate(self._ticks))
        if period is None:
            self.refused = "it does not advance from frame to frame"
            return True
        self.ticks_per_s, self.unit = 10 ** k, UNIT_NAMES[k]
        self.rate_hz = self.ticks_per_s / period
        return True


def frame_period(ticks: np.ndarray) -> float | None:
    """Board ticks per frame from consecutive frames' board times, lost frames allowed for.

    First the median over every run of WINDOW steps of its mean step: rounding to whole ticks costs a
    run at most one tick, so this is within 1/WINDOW tick, and a lost frame only moves the runs that
    hold it (the median ignores them while they are under half). Where that is at least 2 ticks, each
    step is then a whole number of periods (a lost frame: two), and the period is the span over them.
    """
    ticks = np.asarray(ticks, np.float64)
    if len(ticks) < 2 or ticks[-1] <= ticks[0]:
        return None
    window = max(1, min(WINDOW, (len(ticks) - 1) // 4))
    rough = float(np.median((ticks[window:] - ticks[:-window]) / window))
    if rough <= 0:
        return None
    if rough < 2:  # a clock of about a tick per frame: whole periods per step cannot be told apart
        return rough
    periods = np.maximum(1.0, np.round(np.diff(ticks) / rough))
    return float((ticks[-1] - ticks[0]) / periods.sum())
