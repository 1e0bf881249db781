"""The fast detector: numpy int64 across channels, over chunks of frames, bit-identical to PlainEngine.

Between two baseline updates the baseline of a channel is constant, so its deltas for a whole chunk of
frames are one array operation. A chunk is the run of frames up to the next multiple of the shortest
baseline period, so no period ends inside it. A channel that is released and stays below its threshold
for the whole chunk, or touched and stays at or above its release level without reaching its stuck
timeout, cannot change state: it is settled in bulk. Every other channel (a possible transition, a
pending re-baseline, confirming or releasing) is run through the reference `step` frame by frame for
that chunk. Period ends are then applied to all channels at once, exactly as `period_end` does.

When every channel has the same period and none is confirming, releasing or pending, whole periods are
settled at once (`_speculate`): the baseline recursion runs period by period over channel vectors, the
deltas of all those frames follow in one operation, and the first period in which any channel could
change state is handed back to the chunk path. How many periods to try adapts to how busy the keys are.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from processing.detections import DetectionEvent, KeyState
from processing.fixed import FRAC_BITS, ONE_FP, tdiv_pow2_np
from processing.reference import RELEASED, TOUCHED, ChannelState, step
from processing.settings import ChannelSettings
from protocol.events import FrameBlock

_STATE_FIELDS = ("baseline_fp", "state", "count", "held", "acc")


class Engine:
    """Fast detection engine. `process` returns events in (frame, channel) order, like PlainEngine."""

    def __init__(self, channels: int, settings: Sequence[ChannelSettings], polarity: Sequence[int]) -> None:
        if len(settings) != channels or len(polarity) != channels:
            raise ValueError(f"need {channels} settings and polarities, "
                             f"got {len(settings)} and {len(polarity)}")
        if any(p not in (1, -1) for p in polarity):
            raise ValueError(f"polarity must be +1 or -1 per channel, not {list(polarity)}")
        self.channels = channels
        self.pol = np.array([int(p) for p in polarity], np.int64)
        zeros = np.zeros(channels, np.int64)
        self.baseline_fp, self.state, self.count, self.held, self.acc = (zeros.copy() for _ in range(5))
        self.reading, self.delta = zeros.copy(), zeros.copy()
        self.clean = np.zeros(channels, bool)
        self.pending = np.ones(channels, bool)
        self.touch_t_s = np.zeros(channels, np.float64)
        self.frames = 0
        self.settings: list[ChannelSettings] = []
        for s in settings:
            s.check()
        self._load_settings(list(settings))
        self.last_deltas = np.zeros((0, channels), np.int64)
        self.last_states = np.zeros((0, channels), np.int8)

    def _load_settings(self, settings: list[ChannelSettings]) -> None:
        self.settings = settings
        col = lambda key: np.array([getattr(s, key) for s in settings], np.int64)  # noqa: E731
        self.thr_fp = col("threshold_counts") * ONE_FP
        self.rel_fp = (col("threshold_counts") - col("hysteresis_counts")) * ONE_FP
        self.stuck = col("stuck_timeout_frames")
        self.slow, self.fast = col("baseline_slow_shift"), col("baseline_fast_shift")
        self.period_mask = col("baseline_period_frames") - 1
        self.mean_mul = np.array([1 << (FRAC_BITS - s.period_exp) for s in settings], np.int64)
        self.chunk = min(s.baseline_period_frames for s in settings) if settings else 1
        self._uniform = bool(settings) and all(s.baseline_period_frames == self.chunk for s in settings)
        self._spec_periods, self._cooldown, self._backoff = 8, 0, 1

    def set_settings(self, channel: int, s: ChannelSettings) -> None:
        s.check()
        settings = list(self.settings)
        settings[channel] = s
        self._load_settings(settings)
        self.clean[channel] = False

    def rebaseline(self, channel: int | None = None) -> None:
        if channel is None:
            self.pending[:] = True
        else:
            self.pending[channel] = True

    def set_polarity(self, channel: int, polarity: int) -> None:
        """Turn a channel's direction around (or confirm it): it re-baselines on its next frame."""
        if polarity not in (1, -1):
            raise ValueError(f"polarity must be +1 or -1, not {polarity!r}")
        self.pol[channel] = polarity
        self.clean[channel] = False
        self.pending[channel] = True

    def process(self, block: FrameBlock) -> list[DetectionEvent]:
        if block.channels != self.channels:
            raise ValueError(f"block has {block.channels} channels, engine {self.channels}")
        n = len(block)
        readings = np.ascontiguousarray(block.readings, np.int64)
        deltas = np.empty((n, self.channels), np.int64)
        states = np.empty((n, self.channels), np.int8)
        found: list[tuple[int, int, DetectionEvent]] = []
        start = 0
        while start < n:
            if self._cooldown:
                self._cooldown -= 1
            elif self._uniform and self.frames & (self.chunk - 1) == 0 and n - start >= 2 * self.chunk:
                periods = min(self._spec_periods, (n - start) // self.chunk)
                taken = self._speculate(readings, start, periods, deltas, states)
                self._adapt(periods, taken)
                start += taken * self.chunk
                if taken == periods:
                    continue
            room = self.chunk - (self.frames & (self.chunk - 1))
            stop = min(n, start + room)
            self._chunk(block, readings, start, stop, deltas, states, found)
            start = stop
        if n:
            self.reading = readings[-1].copy()
            self.delta = deltas[-1].copy()
        self.last_deltas, self.last_states = deltas, states
        found.sort(key=lambda item: (item[0], item[1]))
        return [ev for _, _, ev in found]

    def _adapt(self, periods: int, taken: int) -> None:
        """Speculate over about as many periods as tend to pass quietly; back off while it keeps failing."""
        if taken == periods:
            self._spec_periods, self._backoff = min(64, periods * 2), 1
        elif taken:
            self._spec_periods, self._backoff = max(2, taken), 1
        else:
            self._spec_periods = 2
            self._cooldown = self._backoff
            self._backoff = min(64, self._backoff * 2)

    def _speculate(self, readings: np.ndarray, start: int, periods: int, deltas: np.ndarray,
                   states: np.ndarray) -> int:
        """Settle whole baseline periods at once while no channel changes state; returns periods taken.

        Needs one period length for all channels, a period-aligned start (so every channel has acc = 0
        and, unless an edit or re-baseline intervened, clean = true) and every channel released or
        touched. The baseline recursion runs period by period over channel vectors; the deltas of all
        frames follow in one operation; the first period in which any channel could change state (or
        reach its stuck timeout) ends the run, and the caller steps that period the careful way.
        """
        released, touched = self.state == RELEASED, self.state == TOUCHED
        if self.pending.any() or not self.clean.all() or not (released | touched).all():
            return 0
        p, c = self.chunk, self.channels
        seg = readings[start:start + periods * p].reshape(periods, p, c)
        means_fp = seg.sum(axis=1) * self.mean_mul
        bases = np.empty((periods + 1, c), np.int64)
        bases[0] = self.baseline_fp
        for k in range(periods):
            diff = means_fp[k] - bases[k]
            shift = np.where(self.pol * diff > 0, self.slow, self.fast)
            bases[k + 1] = bases[k] + np.where(released, tdiv_pow2_np(diff, shift), 0)
        x = self.pol * (seg * ONE_FP - bases[:periods, None, :])
        held_end = self.held + p * np.arange(1, periods + 1)[:, None]
        quiet_tch = (x.min(axis=1) >= self.rel_fp) & ((self.stuck == 0) | (held_end < self.stuck))
        quiet = np.where(released, x.max(axis=1) < self.thr_fp, quiet_tch).all(axis=1)
        taken = periods if quiet.all() else int(np.argmin(quiet))
        if taken:
            rows = slice(start, start + taken * p)
            deltas[rows] = tdiv_pow2_np(x[:taken].reshape(taken * p, c), FRAC_BITS)
            states[rows] = self.state
            self.baseline_fp = bases[taken].copy()
            self.held += np.where(touched, taken * p, 0)
            self.frames += taken * p
        return taken

    def _chunk(self, block: FrameBlock, readings: np.ndarray, start: int, stop: int, deltas: np.ndarray,
               states: np.ndarray, found: list) -> None:
        r = readings[start:stop]
        g = stop - start
        x = self.pol * (r * ONE_FP - self.baseline_fp)
        deltas[start:stop] = tdiv_pow2_np(x, FRAC_BITS)
        quiet_rel = (self.state == RELEASED) & (x.max(axis=0) < self.thr_fp)
        quiet_tch = ((self.state == TOUCHED) & (x.min(axis=0) >= self.rel_fp)
                     & ((self.stuck == 0) | (self.held + g < self.stuck)))
        busy = ~(quiet_rel | quiet_tch) | self.pending
        states[start:stop] = self.state
        self.acc += np.where(quiet_rel, r.sum(axis=0), 0)
        self.clean &= ~quiet_tch
        self.held += np.where(quiet_tch, g, 0)
        for c in np.flatnonzero(busy).tolist():
            self._step_channel(c, block, r, start, deltas, states, found)
        self.frames += g
        due = (self.frames & self.period_mask) == 0
        if due.any():
            self._period_ends(due)

    def _step_channel(self, c: int, block: FrameBlock, r: np.ndarray, start: int, deltas: np.ndarray,
                      states: np.ndarray, found: list) -> None:
        ch = ChannelState()
        for key in _STATE_FIELDS:
            setattr(ch, key, int(getattr(self, key)[c]))
        ch.clean, ch.pending = bool(self.clean[c]), bool(self.pending[c])
        ch.touch_t_s = float(self.touch_t_s[c])
        s, pol = self.settings[c], int(self.pol[c])
        column = r[:, c].tolist()
        times = block.t_s[start:start + len(column)].tolist()
        for i, reading in enumerate(column):
            ev = step(ch, s, pol, reading, c, block.first_index + start + i, times[i])
            if ev is not None:
                found.append((start + i, c, ev))
            deltas[start + i, c] = ch.delta
            states[start + i, c] = ch.state
        for key in _STATE_FIELDS:
            getattr(self, key)[c] = getattr(ch, key)
        self.clean[c], self.pending[c], self.touch_t_s[c] = ch.clean, ch.pending, ch.touch_t_s

    def _period_ends(self, due: np.ndarray) -> None:
        update = due & self.clean
        if update.any():
            diff = self.acc * self.mean_mul - self.baseline_fp
            shift = np.where(self.pol * diff > 0, self.slow, self.fast)
            self.baseline_fp += np.where(update, tdiv_pow2_np(diff, shift), 0)
        self.acc[due] = 0
        self.clean |= due

    @property
    def polarity(self) -> list[int]:
        return self.pol.tolist()

    @property
    def readings(self) -> list[int]:
        return self.reading.tolist()

    @property
    def baselines_fp(self) -> list[int]:
        return self.baseline_fp.tolist()

    @property
    def deltas(self) -> list[int]:
        return self.delta.tolist()

    @property
    def states(self) -> list[KeyState]:
        return [KeyState(v) for v in self.state.tolist()]
