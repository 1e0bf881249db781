"""A synthetic recording with known touches, noise and drift: every touch found, none false, in time.

The trace is invented for this test: 8 channels at 100 Hz for 10 minutes, Gaussian noise (sigma 4
counts), a slow drift of +-60 counts (sine over 5 minutes) plus a linear creep, a small tone near mains
alias, and 25 touches per channel of 150-400 counts rising over 3 frames.
"""

import numpy as np

from processing.detections import Release, Touch
from processing.engine import Engine
from processing.settings import ChannelSettings
from tests.processing.helpers import blocks

RATE_HZ, MINUTES, CHANNELS = 100, 10, 8
RISE = 3


def make_trace(seed=7):
    rng = np.random.default_rng(seed)
    n = RATE_HZ * 60 * MINUTES
    t = np.arange(n) / RATE_HZ
    drift = 60 * np.sin(2 * np.pi * t / 300) + t * 0.05
    base = 2000 + drift[:, None] + rng.integers(0, 500, CHANNELS)
    x = base + rng.normal(0, 4, (n, CHANNELS)) + 3 * np.sin(2 * np.pi * 40 * t)[:, None]
    truth = []
    for c in range(CHANNELS):
        starts = np.sort(rng.choice(np.arange(500, n - 1000, 900), 25, replace=False))
        for s in starts:
            length = int(rng.integers(10, 600))
            amp = float(rng.uniform(150, 400))
            ramp = np.minimum(1.0, (np.arange(length + RISE) + 1) / RISE)[:length]
            x[s:s + length, c] += amp * ramp
            truth.append((c, int(s), int(s + length), amp))
    return np.round(x).astype(np.int64), truth


def test_every_touch_found_none_false_within_debounce():
    readings, truth = make_trace()
    s = ChannelSettings(threshold_counts=80, hysteresis_counts=15, touch_debounce_frames=3,
                        release_debounce_frames=3)
    e = Engine(CHANNELS, [s] * CHANNELS, [1] * CHANNELS)
    events = []
    for b in blocks(readings, [37, 256, 1000]):
        events += e.process(b)
    touches = [ev for ev in events if isinstance(ev, Touch)]
    releases = [ev for ev in events if isinstance(ev, Release)]
    assert len(touches) == len(truth) == len(releases)
    n_db, sure = s.touch_debounce_frames, 0
    for c, start, end, amp in truth:
        hit = [ev for ev in touches if ev.channel == c and start <= ev.index < end]
        assert len(hit) == 1, (c, start)
        # delay: the ramp is fully up (>= 150 counts, far above 80 plus noise and baseline lag) on its
        # frame RISE - 1; the debounce then takes N - 1 more frames. The release: M frames after the end.
        delay = hit[0].index - start
        assert n_db - 1 <= delay <= (RISE - 1) + (n_db - 1)
        # Exactly: a touch whose first ramp frame (amp / 3) clears the threshold by more than noise (3.5
        # sigma = 14), the 40 Hz tone (3) and the baseline's lag behind the drift (about 13) is reported
        # on frame N - 1 of the touch, not later.
        if amp / RISE >= s.threshold_counts + 35:
            assert delay == n_db - 1, (c, start, amp)
            sure += 1
        late = end + s.release_debounce_frames - 1
        gone = [ev for ev in releases if ev.channel == c and end <= ev.index <= late]
        assert len(gone) == 1, (c, end)
    assert sure >= 20  # enough touches were checked exactly
