"""The whole-array tuning `padtune tune` did before it streamed: the plain statement of its rules, every
key's float trace in memory and masks frames long, which streaming tuning (`processing.tuning` and the
modules it goes through) is held to by tests/processing/test_tune_stream.py and the module tests.

- `find_touches`: touches from the recording's marks when it has touch marks (read here on their own,
  plainly: each start mark and the next end mark of that key, `np.searchsorted` of their times, a pair
  holding no frame left out); without, a drift-following baseline (a rolling minimum of half-second
  medians, a standard morphological baseline estimate, interpolated back to every frame) and the frames
  well above each key's untouched spread (median, MAD and 99.5th percentile of its whole trace).
- `reference_tune`: per key the figures and suggestion (`key_figures`, `suggest` over whole arrays), the
  noise while touched (`touched_noise` of each touch's slice), the lowest and highest untouched reading,
  and crosstalk (`couplings_by_key`: each key's whole trace, the frames where one key alone was touched).
The guided capture's tests use `find_touches` and `estimate_baseline` too.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from processing.crosstalk import (
    MIN_FRAMES,
    Coupling,
    TouchedNoise,
    largest_first,
    slider_of,
    touched_noise,
    untouched_zero,
)
from processing.recording_format import Mark
from processing.slider import SliderSpec
from processing.stretches import KeyFigures, expand_polarity, key_figures
from processing.suggest import Refusal, Suggestion, suggest


@dataclass
class KeyTrace:
    """One key of a recording: its delta trace (float counts, touch positive), where it was touched, the
    quiet frames (far from any touch of any key), and its deltas inside its touches, edges trimmed."""

    channel: int
    name: str
    delta: np.ndarray
    stretches: list[tuple[int, int]]
    quiet_mask: np.ndarray
    touched: np.ndarray
    from_marks: bool

    @property
    def quiet(self) -> np.ndarray:
        return self.delta[self.quiet_mask]

    @property
    def quiet_frames(self) -> int:
        return int(np.count_nonzero(self.quiet_mask))

    def quiet_in(self, delta: np.ndarray) -> np.ndarray:
        return delta[self.quiet_mask]


@dataclass(frozen=True, slots=True)
class _Knots:
    """A drift-following baseline as `estimate_baseline` draws it: its points, interpolated on demand."""

    frames: int
    centres: np.ndarray
    low: np.ndarray

    def at_every_frame(self) -> np.ndarray:
        n, low = self.frames, self.low
        return np.interp(np.arange(n), self.centres, low) if len(low) > 1 else \
            np.full(n, low[0] if len(low) else 0.0)


def _baseline_knots(values: np.ndarray, rate_hz: float, window_s: float = 0.5,
                    span_s: float = 6.0) -> _Knots:
    n = len(values)
    w = max(1, round(window_s * rate_hz))
    starts = np.arange(0, n, w)
    medians = np.array([np.median(values[s:s + w]) for s in starts])
    half = max(1, round(span_s / window_s / 2))
    low = np.array([medians[max(0, i - half): i + half + 1].min() for i in range(len(medians))])
    centres = np.minimum(starts + w / 2, n - 1)
    return _Knots(n, centres, low)


def estimate_baseline(values: np.ndarray, rate_hz: float, window_s: float = 0.5,
                      span_s: float = 6.0) -> np.ndarray:
    """Rolling minimum of window medians (touch positive), interpolated back to every frame."""
    return _baseline_knots(values, rate_hz, window_s, span_s).at_every_frame()


def key_delta(readings: np.ndarray, channel: int, sign: int, rate_hz: float) -> np.ndarray:
    """One key's delta trace: its signed readings less their baseline (+ 0.0: never -0.0)."""
    v = sign * readings[:, channel].astype(np.float64)
    return v - _baseline_knots(v, rate_hz).at_every_frame() + 0.0


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    edges = np.flatnonzero(np.diff(np.concatenate([[0], mask.astype(np.int8), [0]])))
    return list(zip(edges[0::2].tolist(), edges[1::2].tolist(), strict=True))


def _trimmed(delta: np.ndarray, runs: list[tuple[int, int]], trim: int) -> np.ndarray:
    """The touched frames without the finger's arrival and departure (at most a fifth of each side)."""
    parts = []
    for a, b in runs:
        cut = min(trim, (b - a) // 5)
        parts.append(delta[a + cut: b - cut])
    return np.concatenate(parts) if parts else np.zeros(0)


def _plain_mark_ranges(t_s: np.ndarray, marks: Sequence[Mark], start_kind: str, end_kind: str,
                       channel: str | None) -> list[tuple[int, int]]:
    out, opened = [], None
    for m in sorted(marks, key=lambda m: m.t_s):
        if m.channel != channel and channel is not None:
            continue
        if m.kind == start_kind:
            opened = m.t_s
        elif m.kind == end_kind and opened is not None:
            a, b = int(np.searchsorted(t_s, opened)), int(np.searchsorted(t_s, m.t_s))
            if b > a:
                out.append((a, b))
            opened = None
    return out


def find_touches(t_s: np.ndarray, readings: np.ndarray, names: Sequence[str], polarity: Sequence[int],
                 rate_hz: float, marks: Sequence[Mark] = (), min_touch_s: float = 0.1) -> list[KeyTrace]:
    """Per key: delta trace, touched stretches (from marks, else found), untouched and touched deltas."""
    n, width = readings.shape
    pol = expand_polarity(polarity, width)
    trim = max(1, round(0.05 * rate_hz))
    marked = None
    if any(m.kind == "touch-start" for m in marks):
        marked = {c: _plain_mark_ranges(t_s, marks, "touch-start", "touch-end", name)
                  for c, name in enumerate(names)}
    deltas = [key_delta(readings, c, int(pol[c]), rate_hz) for c in range(width)]
    found = {c: marked[c] if marked is not None else _find_runs(deltas[c], rate_hz, min_touch_s)
             for c in range(width)}
    busy = np.zeros(n, bool)  # any key touched, widened by a guard, is no use for noise
    guard = max(1, round(0.3 * rate_hz))
    for runs in found.values():
        for a, b in runs:
            busy[max(0, a - guard): b + guard] = True
    quiet_mask = ~busy
    if marked is not None and (q := _plain_mark_ranges(t_s, marks, "quiet-start", "quiet-end", None)):
        quiet_mask = np.zeros(n, bool)
        for a, b in q:
            quiet_mask[a:b] = True
    return [KeyTrace(c, names[c], deltas[c], found[c], quiet_mask, _trimmed(deltas[c], found[c], trim),
                     marked is not None) for c in range(width)]


def _find_runs(delta: np.ndarray, rate_hz: float, min_touch_s: float) -> list[tuple[int, int]]:
    """Frames well above the untouched spread, as runs at least `min_touch_s` long."""
    centre = np.median(delta)
    mad = float(np.median(np.abs(delta - centre))) * 1.4826  # MAD to sigma for normal noise (NIST handbook)
    spread = max(mad, 0.5)
    top = float(np.percentile(delta, 99.5))
    level = max(centre + 8 * spread, centre + 0.4 * (top - centre))
    if top - centre < 10 * spread:
        return []  # nothing stands out of the noise
    runs = [(a, b) for a, b in _runs(delta > level) if b - a >= max(2, round(min_touch_s * rate_hz))]
    merged: list[tuple[int, int]] = []
    gap = max(1, round(0.05 * rate_hz))
    for a, b in runs:
        if merged and a - merged[-1][1] <= gap:
            merged[-1] = (merged[-1][0], b)
        else:
            merged.append((a, b))
    return merged


def alone_frames(stretches: Sequence[Sequence[tuple[int, int]]], frames: int) -> dict[int, np.ndarray]:
    """Source key -> the frames (indices, ascending) where it was the only key touched, from each key's
    [start, stop) touches; keys never touched alone are left out. One counter per frame, no frames x keys
    mask."""
    count = np.zeros(frames, np.int32)
    who = np.zeros(frames, np.int32)
    for c, runs in enumerate(stretches):
        mine = np.zeros(frames, bool)
        for a, b in runs:
            mine[a:b] = True
        count += mine
        who[mine] = c
    at = np.flatnonzero(count == 1)
    keys = who[at]
    return {int(s): at[keys == s] for s in np.unique(keys)}


def couplings_by_key(column: Callable[[int], np.ndarray], stretches: Sequence[Sequence[tuple[int, int]]],
                     frames: int, zero_of: Callable[[int, np.ndarray], float],
                     thresholds: Mapping[int, float | None],
                     sliders: Iterable[SliderSpec] = ()) -> list[Coupling]:
    """`couplings(untouched, during_touches(deltas, touched), ...)` without a frames x keys array: each
    key's deltas are asked for once (`column(c)`, frames long), the touched frames come as each key's
    [start, stop) stretches, a key's zero from `zero_of(c, its deltas)` (`untouched_zero` of its untouched
    ones), and each pair's frames are reduced to their median at once. The same couplings in the same
    order; memory is one key's trace and the frames where a key was touched alone."""
    rows = alone_frames(stretches, frames)
    neighbours = slider_of(sliders)
    width = len(stretches)
    found: dict[tuple[int, int], Coupling] = {}
    for target in range(width):
        sources = [s for s in rows if s != target and len(rows[s]) >= MIN_FRAMES]
        if not sources:
            continue
        col = column(target)
        zero = zero_of(target, col)
        for s in sources:
            values = col[rows[s]]
            found[(s, target)] = Coupling(s, target, float(np.median(values)) - zero, len(values),
                                          thresholds.get(target), neighbours.get((s, target)))
    ordered = [found[(s, t)] for s in rows for t in range(width) if (s, t) in found]  # as `during_touches`
    return sorted(ordered, key=largest_first)


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
