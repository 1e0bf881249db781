"""Noise, SNR and verdict for every channel in one numpy pass over the session's history.

`processing.measure.Measures.quality(channel)` is the definition; it walks the whole history once per
channel, which for 64 channels twice a second would cost the screen a good part of a core. This does
the same computation for all channels at once (same frames, same formulas; a test checks the two
agree) and leaves the per-channel touch-signal median to `Measures.touch_signal`.
"""

from __future__ import annotations

import math

import numpy as np

from processing.detections import KeyState
from processing.measure import MIN_NOISE_SAMPLES, ChannelQuality, Measures, NoiseStats


def all_quality(m: Measures) -> list[ChannelQuality]:
    h = m.history
    n = len(h)
    if n == 0:
        return [ChannelQuality(None, m.touch_signal(c), None, None, m.bounds.verdict(None))
                for c in range(m.channels)]
    idx = np.arange(h.written - n, h.written) % h.capacity
    deltas = h.deltas[idx].astype(np.float64)
    released = h.states[idx] == KeyState.RELEASED
    # Keep, per channel, only the newest `window_frames` released frames (as Measures.released_deltas).
    rank_from_end = np.cumsum(released[::-1], axis=0)[::-1]
    keep = released & (rank_from_end <= m.window_frames)
    count = keep.sum(axis=0)
    safe = np.maximum(count, 1)
    mean = np.where(keep, deltas, 0.0).sum(axis=0) / safe
    var = np.where(keep, (deltas - mean) ** 2, 0.0).sum(axis=0) / safe
    hi = np.where(keep, deltas, -np.inf).max(axis=0)
    lo = np.where(keep, deltas, np.inf).min(axis=0)
    out = []
    for c in range(m.channels):
        noise = None
        if count[c] >= MIN_NOISE_SAMPLES:
            noise = NoiseStats(float(math.sqrt(var[c])), float(hi[c] - lo[c]), int(count[c]))
        signal = m.touch_signal(c)
        snr_pp = snr_rms = None
        if noise is not None and signal is not None:
            snr_pp = signal / noise.pp_counts if noise.pp_counts > 0 else math.inf
            snr_rms = signal / noise.rms_counts if noise.rms_counts > 0 else math.inf
        out.append(ChannelQuality(noise, signal, snr_pp, snr_rms, m.bounds.verdict(snr_pp)))
    return out
