"""What a channel goes through before it may report a touch: its first quiet second, then its first touch.

Pure (numpy, no I/O). Per channel, a phase:
- MEASURING: collecting its first quiet stretch (`processing.provisional`: QUIET_S and at least
  QUIET_MIN_FRAMES frames that look untouched), needed when it has no tuned settings (provisional ones
  come from that stretch's noise) or when its direction is unknown (the learner starts from its level).
- LEARNING: direction unknown; a `processing.polarity.PolarityLearner` waits for a touch that comes back.
- READY: it detects normally.
`advance(readings, t_s)` takes a block and returns the transitions in frame order, each with the row after
which it applies: the session runs the engine up to that row, applies it, and goes on, so a whole
recording in one block is handled exactly like a live stream. (The phases are then already those at
the block's end: a transition says itself what it leads to.)
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np

from processing.polarity import LEARNED, PolarityLearner
from processing.provisional import QUIET_MIN_FRAMES, QUIET_S, QuietStats, is_quiet, provisional_settings
from processing.settings import ChannelSettings

MEASURING, LEARNING, READY = "measuring", "learning", "ready"
GIVE_UP_S = 10.0  # no quiet stretch in this long (a key touched all along, slow hum): take the quietest
MAX_OUT_S = 10.0  # an excursion that has not come back in this long was not a touch
FOLLOW_S = 2.0  # the learner's quiet level follows drift with about this time constant


@dataclass(frozen=True, slots=True)
class Measured:
    """The channel's quiet stretch ended at `row`; `settings` are the provisional ones from its noise."""

    channel: int
    row: int
    stats: QuietStats
    settings: ChannelSettings
    ready: bool  # it detects from the next frame (else it goes on to learn its direction)
    quietest: bool = False  # no quiet stretch came within GIVE_UP_S: the quietest one seen


@dataclass(frozen=True, slots=True)
class Learned:
    """The channel's first clear excursion came back at `row`: `sign` is its touch direction."""

    channel: int
    row: int
    sign: int
    swing_counts: int


@dataclass(frozen=True, slots=True)
class Lost:
    """An excursion that did not come back within MAX_OUT_S: the channel measures a quiet level again."""

    channel: int
    row: int
    swing_counts: int


Transition = Measured | Learned | Lost


class Startup:
    """Every channel's phase. `need_noise[c]`: it wants provisional settings; `need_polarity[c]`: its
    direction is unknown. A channel needing neither is READY from the start and costs nothing."""

    def __init__(self, channels: int, need_noise: Sequence[bool], need_polarity: Sequence[bool],
                 rate_hz: float | None = None) -> None:
        self.channels = channels
        self.need_noise = [bool(x) for x in need_noise]
        self.need_polarity = [bool(x) for x in need_polarity]
        self.rate_hz = rate_hz  # the board's declared or measured rate (None: each stretch measures its own)
        self.phase = [MEASURING if self.need_noise[c] or self.need_polarity[c] else READY
                      for c in range(channels)]
        self.stats: dict[int, QuietStats] = {}  # each channel's latest quiet stretch
        self._learners: dict[int, PolarityLearner] = {}
        self._frames = 0  # frames seen so far (the absolute frame number of the next one)
        self._buf_r = np.zeros((0, channels), np.int64)  # frames some measuring channel still looks at
        self._buf_t = np.zeros(0, np.float64)
        self._buf_first = 0  # absolute frame number of the buffer's first row
        self._start = {c: 0 for c in range(channels) if self.phase[c] == MEASURING}  # window starts
        self._since = dict(self._start)  # the frame each measuring channel began measuring at ...
        self._since_t: dict[int, float] = {}  # ... and its host time
        self._best: dict[int, QuietStats] = {}  # its quietest window so far (for GIVE_UP_S)

    @property
    def busy(self) -> bool:
        return any(p != READY for p in self.phase)

    # ------------------------------------------------------------ changes from outside
    def settings_given(self, channel: int) -> bool:
        """The channel's settings were set by the user: no provisional ones. True if it is now READY."""
        self.need_noise[channel] = False
        return self._maybe_ready(channel)

    def polarity_given(self, channel: int) -> bool:
        """The channel's direction is known now (info line, edit). True if it is now READY."""
        self.need_polarity[channel] = False
        self._learners.pop(channel, None)
        return self._maybe_ready(channel)

    def relearn(self, channel: int) -> None:
        """Forget the channel's direction: measure a quiet level from the next frame, then learn it."""
        self.need_polarity[channel] = True
        self._learners.pop(channel, None)
        self._measure_from(channel, self._frames)

    def _maybe_ready(self, channel: int) -> bool:
        if self.phase[channel] == READY or self.need_polarity[channel]:
            return False
        if self.need_noise[channel]:  # still measuring for its provisional settings
            return False
        self.phase[channel] = READY
        self._start.pop(channel, None)
        return True

    def _measure_from(self, channel: int, frame: int) -> None:
        self.phase[channel] = MEASURING
        self._start[channel] = self._since[channel] = frame
        self._since_t.pop(channel, None)
        self._best.pop(channel, None)

    # ------------------------------------------------------------ frames
    def advance(self, readings: np.ndarray, t_s: np.ndarray) -> list[Transition]:
        """Take the next block (frames x channels, host times); return its transitions in frame order."""
        n = len(readings)
        if not self.busy or n == 0:
            self._frames += n
            return []
        base = self._frames
        self._buf_r = np.concatenate((self._buf_r, np.asarray(readings, np.int64)))
        self._buf_t = np.concatenate((self._buf_t, np.asarray(t_s, np.float64)))
        out: list[Transition] = []
        for c in range(self.channels):
            if self.phase[c] != READY:
                out.extend(self._channel(c, base, n))
        self._frames += n
        self._trim()
        out.sort(key=lambda tr: (tr.row, tr.channel))
        return out

    def _channel(self, c: int, base: int, n: int) -> list[Transition]:
        out: list[Transition] = []
        pos = base  # the first frame of this block channel c has not been through yet
        while pos < base + n and self.phase[c] != READY:
            if self.phase[c] == MEASURING:
                found = self._quiet(c, base + n)
                if found is None:
                    break
                end, stats, quietest = found
                settings = provisional_settings(stats, self.rate_hz)
                out.append(Measured(c, end - base, stats, settings, not self.need_polarity[c], quietest))
                self.stats[c] = stats
                self.need_noise[c] = False
                self._start.pop(c, None)
                pos = end + 1
                if self.need_polarity[c]:
                    self.phase[c] = LEARNING
                    self._learners[c] = self._learner(stats, settings)
                else:
                    self.phase[c] = READY
            else:
                first = self._buf_first
                verdict = self._learners[c].feed(self._buf_r[pos - first:base + n - first, c])
                if verdict is None:
                    break
                row = pos - base + verdict.row
                if verdict.outcome == LEARNED:
                    out.append(Learned(c, row, verdict.sign, verdict.swing_counts))
                    self.need_polarity[c] = False
                    self.phase[c] = READY
                    del self._learners[c]
                else:
                    out.append(Lost(c, row, verdict.swing_counts))
                    del self._learners[c]
                    self._measure_from(c, base + row + 1)
                pos = base + row + 1
        return out

    def _learner(self, stats: QuietStats, settings: ChannelSettings) -> PolarityLearner:
        rate = self.rate_hz or stats.rate_hz or QUIET_MIN_FRAMES / QUIET_S
        return PolarityLearner(stats.level_counts, settings.threshold_counts, settings.release_level_counts,
                               settings.touch_debounce_frames, settings.release_debounce_frames,
                               max_out_frames=max(1, round(MAX_OUT_S * rate)),
                               follow_frames=max(1, round(FOLLOW_S * rate)))

    def _quiet(self, c: int, upto: int) -> tuple[int, QuietStats, bool] | None:
        """The channel's first quiet window ending before frame `upto`: (its last frame, stats, quietest).

        A window is QUIET_S of frames (at least QUIET_MIN_FRAMES): counted in frames at the board's rate
        when that is known (a replay or a sped-up simulation delivers seconds of frames in less), else
        in host time. Windows slide on by a quarter while they are not quiet; GIVE_UP_S after the channel
        began measuring, the quietest window seen so far is taken (at that frame, whatever the blocks)."""
        first = self._buf_first
        t, r = self._buf_t, self._buf_r
        end = upto - first
        give_up = self._give_up_row(c, end)
        while True:
            s = self._start[c] - first
            e = self._frame_after(s, QUIET_S, end, QUIET_MIN_FRAMES)
            if e is None or (give_up is not None and e > give_up):
                break
            window = r[s:e + 1, c]
            stats = QuietStats.of(window, t[s:e + 1])
            if is_quiet(window):
                return first + e, stats, False
            best = self._best.get(c)
            if best is None or stats.pp_counts < best.pp_counts:
                self._best[c] = stats
            self._start[c] += max(1, (e - s + 1) // 4)  # slide on by a quarter
        best = self._best.get(c)
        if give_up is not None and best is not None:
            recent = r[max(0, give_up + 1 - best.frames):give_up + 1, c]  # the level it idles at now
            return first + give_up, replace(best, level_counts=float(recent.mean())), True
        return None

    def _give_up_row(self, c: int, end: int) -> int | None:
        """The buffer row GIVE_UP_S after the channel began measuring, if before row `end`."""
        first = self._buf_first
        if self.rate_hz:
            row = max(0, self._since[c] + round(GIVE_UP_S * self.rate_hz) - first)
            return row if row < end else None
        if c not in self._since_t and 0 <= self._since[c] - first < len(self._buf_t):
            self._since_t[c] = float(self._buf_t[self._since[c] - first])
        if c not in self._since_t:
            return None
        late = np.flatnonzero(self._buf_t[:end] - self._since_t[c] >= GIVE_UP_S)
        return int(late[0]) if len(late) else None

    def _frame_after(self, s: int, seconds: float, end: int, min_frames: int = 1) -> int | None:
        """The buffer row `seconds` after row `s` (and at least `min_frames` frames from it, counting
        both), if it lies before row `end`: by the board's rate when known, else by host time."""
        if s < 0 or s >= end:
            return None
        if self.rate_hz:
            e = s + max(min_frames, round(seconds * self.rate_hz) + 1) - 1
            return e if e < end else None
        lo = s + min_frames - 1
        if lo >= end:
            return None
        later = np.flatnonzero(self._buf_t[lo:end] - self._buf_t[s] >= seconds)
        return lo + int(later[0]) if len(later) else None

    def _trim(self) -> None:
        """Keep only the frames a measuring channel's window still starts at or after."""
        starts = [self._start[c] for c in self._start if self.phase[c] == MEASURING]
        keep_from = min(starts) if starts else self._frames
        drop = min(len(self._buf_t), max(0, keep_from - self._buf_first))
        if drop:
            self._buf_r = self._buf_r[drop:]
            self._buf_t = self._buf_t[drop:]
            self._buf_first += drop


def settings_for_engine(settings: ChannelSettings, ready: bool) -> ChannelSettings:
    """What the engine runs for a channel: its settings once READY; before that a threshold no delta can
    reach, so it reports nothing while its baseline still follows the readings."""
    if ready:
        return settings
    from processing.settings import MAX_COUNTS

    return replace(settings, threshold_counts=MAX_COUNTS, hysteresis_counts=0, stuck_timeout_frames=0)
