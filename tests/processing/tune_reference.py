"""The whole-array tuning `padtune tune` did before it streamed (every key's float trace in memory, masks
frames long): the plain reference streaming tuning (`processing.tuning`) is held to. It takes the touches,
figures and suggestions with `processing.stretches.find_touches`, `key_figures` and `suggest` over whole
arrays, crosstalk with `couplings_by_key`, noise while touched with `touched_noise` over each touch's slice,
and each channel's untouched readings with a boolean mask."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from processing.crosstalk import Coupling, TouchedNoise, couplings_by_key, touched_noise, untouched_zero
from processing.stretches import KeyFigures, find_touches, key_figures
from processing.suggest import Refusal, Suggestion, suggest


@dataclass
class ReferenceKey:
    stretches: list[tuple[int, int]]
    figures: KeyFigures
    outcome: Suggestion | Refusal
    touched_noise: TouchedNoise | None
    quiet_frames: int
    touched_frames: int
    untouched_readings: tuple[int, int] | None


def reference_tune(t_s: np.ndarray, readings: np.ndarray, names, polarity, rate_hz: float, marks=(),
                   sliders=(), thresholds_before=None) -> tuple[list[ReferenceKey], list[Coupling]]:
    """Per key what tuning measured, and the crosstalk (thresholds: the suggested one, else the key's
    `thresholds_before`)."""
    traces = find_touches(t_s, readings, names, polarity, rate_hz, marks)
    keys = []
    for trace in traces:
        delta = trace.delta
        untouched = np.rint(trace.quiet_in(delta)).astype(np.int64)
        touched = np.rint(trace.touched).astype(np.int64)
        outcome = suggest(untouched, touched, rate_hz)
        if not len(trace.stretches):
            outcome = Refusal("no touch found on this key: record it being touched (or mark the touches)")
        keep = np.ones(len(t_s), bool)
        for a, b in trace.stretches:
            keep[a:b] = False
        own = readings[keep, trace.channel]
        keys.append(ReferenceKey(
            trace.stretches, key_figures(untouched, touched), outcome,
            touched_noise([delta[a:b] for a, b in trace.stretches], rate_hz), trace.quiet_frames,
            len(trace.touched), (int(own.min()), int(own.max())) if len(own) else None))
    before = thresholds_before or [None] * len(keys)
    thresholds = {c: float(k.outcome.threshold_counts) if isinstance(k.outcome, Suggestion) else before[c]
                  for c, k in enumerate(keys)}
    found = couplings_by_key(lambda c: traces[c].delta, [t.stretches for t in traces], len(t_s),
                             lambda c, d: untouched_zero(traces[c].quiet_in(d)), thresholds, sliders)
    return keys, found
