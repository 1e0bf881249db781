"""Sliders and wheels: a position from the centroid of the strongest pad and its neighbours, in integers.

Per frame (ALGORITHM.md, "Sliders and wheels"), for pads p[0..N-1] in order with weights
w = max(delta, 0):
- touched: any pad reported touched (state touched or releasing). Untouched: no position.
- i = the pad with the largest delta (the lowest i among equals); neighbours i-1 and i+1. A slider
  drops neighbours outside 0..N-1; a wheel wraps them, counting pad i-1 of pad 0 as position -1 and
  pad i+1 of pad N-1 as position N.
- num = sum(k * w_k), den = sum(w_k) over those (up to) three pads, k the pad position used.
- slider: position = num * (R - 1) / (den * (N - 1)), 0 .. R-1 (non-negative, so floor = C truncation).
- wheel: position = ((num mod (N*den)) * R) / (N*den), 0 .. R-1, where the mod is non-negative
  (C: ((num % m) + m) % m).
- den == 0 (all three weights zero): position = the strongest pad's own position scaled the same way.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from processing.detections import KeyState, SliderChange


@dataclass(frozen=True, slots=True)
class SliderSpec:
    name: str
    pads: tuple[int, ...]  # channel indices in physical order
    wheel: bool = False
    resolution: int = 100  # positions 0 .. resolution-1


def centroid_position(pad_deltas: list[int], wheel: bool, resolution: int) -> int:
    """The integer position for one frame's pad deltas (see the module docstring)."""
    n = len(pad_deltas)
    i = max(range(n), key=lambda k: (pad_deltas[k], -k))
    num = den = 0
    for k in (i - 1, i, i + 1):
        if wheel:
            w = max(pad_deltas[k % n], 0)
        elif 0 <= k < n:
            w = max(pad_deltas[k], 0)
        else:
            continue
        num += k * w
        den += w
    if den == 0:
        num, den = i, 1
    if wheel:
        m = n * den
        return ((num % m) * resolution) // m
    if n == 1:
        return 0
    return (num * (resolution - 1)) // (den * (n - 1))


class Slider:
    """Tracks one slider or wheel across frames and reports changes of position or touch."""

    def __init__(self, spec: SliderSpec) -> None:
        self.spec = spec
        self.position: int | None = None
        self.touched = False

    def update(self, first_index: int, t_s: np.ndarray, deltas: np.ndarray,
               states: np.ndarray) -> list[SliderChange]:
        pads = list(self.spec.pads)
        held = ((states[:, pads] == KeyState.TOUCHED) | (states[:, pads] == KeyState.RELEASING)).any(axis=1)
        events: list[SliderChange] = []
        if not self.touched and not held.any():
            return events
        pad_deltas = deltas[:, pads].tolist()
        for i, touched in enumerate(held.tolist()):
            position = None
            if touched:
                position = centroid_position(pad_deltas[i], self.spec.wheel, self.spec.resolution)
            if touched != self.touched or position != self.position:
                self.touched, self.position = touched, position
                events.append(SliderChange(self.spec.name, first_index + i, float(t_s[i]), position, touched))
        return events

    def reset(self) -> None:
        self.position, self.touched = None, False
