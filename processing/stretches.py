"""Touched and untouched stretches in a recording, and the figures every tuning view shows.

`find_touches` uses the recording's marks when it has touch marks; without, it estimates a drift-
following baseline (a rolling minimum of half-second medians, a standard morphological baseline
estimate) and finds the touched stretches as the frames well above the untouched spread. `key_figures`
gives noise pp and RMS, the median touch delta and both SNR forms, defined as `processing.measure` does
(`figures_from` the same from summed-up samples).
`find_touches` works on whole arrays: it is the plain statement of the rule, which the guided capture's
tests and `tests/processing/tune_reference.py` use; `padtune tune` applies the same rule by passes over a
recording of any length (`processing.touch_search`, held equal to this one by the tests).
Pure numpy, no I/O.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Protocol

import numpy as np

from processing.recording import Mark
from processing.suggest import Samples

Ranges = list[tuple[int, int]]


class Columns(Protocol):
    """Frames x keys readings that give one key's column (`readings[:, c]`), a numpy array or any
    column store."""

    @property
    def shape(self) -> tuple[int, ...]: ...

    def __getitem__(self, key: tuple[slice, int]) -> np.ndarray: ...


def expand_polarity(polarity: Sequence[int], channels: int) -> np.ndarray:
    """One sign per channel: a per-channel list as given, a single sign for all, +1 when unknown."""
    if len(polarity) == channels:
        return np.array(list(polarity), np.int64)
    return np.full(channels, polarity[0] if len(polarity) == 1 else 1, np.int64)


@dataclass(frozen=True, slots=True)
class KeyFigures:
    noise_pp_counts: float | None
    noise_rms_counts: float | None
    signal_counts: float | None  # median touched delta
    snr_pp: float | None
    snr_rms: float | None


def key_figures(quiet: np.ndarray, touched: np.ndarray) -> KeyFigures:
    """Noise pp/RMS of hands-off deltas, median touch delta, both SNR forms (as in processing.measure)."""
    pp = rms = signal = snr_pp = snr_rms = None
    if len(quiet) >= 2:
        q = np.asarray(quiet, np.float64)
        pp, rms = float(q.max() - q.min()), float(np.std(q))
    if len(touched):
        signal = float(np.median(touched))
    if signal is not None and pp is not None and rms is not None:
        snr_pp = signal / pp if pp > 0 else math.inf
        snr_rms = signal / rms if rms > 0 else math.inf
    return KeyFigures(pp, rms, signal, snr_pp, snr_rms)


def figures_from(quiet: Samples, held: Samples) -> KeyFigures:
    """`key_figures` from samples already summed up (`processing.suggest.Samples`: streaming tuning)."""
    pp = rms = signal = snr_pp = snr_rms = None
    if quiet.count >= 2:
        pp, rms = float(quiet.high - quiet.low), quiet.rms
    if held.count:
        signal = held.median
    if signal is not None and pp is not None and rms is not None:
        snr_pp = signal / pp if pp > 0 else math.inf
        snr_rms = signal / rms if rms > 0 else math.inf
    return KeyFigures(pp, rms, signal, snr_pp, snr_rms)


# ---------------------------------------------------------------- touches in a recording


class KeyTrace:
    """One key of a recording: its delta trace and where it was touched.

    `delta` (float counts, touch positive, one per frame) and `quiet` (the untouched deltas: far from any
    touch of any key) are worked out again from the readings each time they are asked for, and not kept:
    64 keys' float traces of a long recording are several times the readings themselves. Ask once and
    hold the array while it is used. `touched` (this key's deltas inside its touches, edges trimmed) is
    kept: it grows only with the touches.
    """

    __slots__ = ("_delta", "_quiet_mask", "channel", "from_marks", "name", "quiet_frames", "stretches",
                 "touched")

    def __init__(self, channel: int, name: str, delta: Callable[[], np.ndarray],
                 stretches: list[tuple[int, int]], quiet_mask: np.ndarray, touched: np.ndarray,
                 from_marks: bool) -> None:
        self.channel = channel
        self.name = name
        self._delta = delta
        self.stretches = stretches  # [start, stop) frame ranges of touches
        self._quiet_mask = quiet_mask
        self.quiet_frames = int(np.count_nonzero(quiet_mask))
        self.touched = touched
        self.from_marks = from_marks

    @property
    def delta(self) -> np.ndarray:
        return self._delta()

    @property
    def quiet(self) -> np.ndarray:
        return self._delta()[self._quiet_mask]

    def quiet_in(self, delta: np.ndarray) -> np.ndarray:
        """`quiet` taken from this key's `delta` already in hand (not worked out again)."""
        return delta[self._quiet_mask]


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


@dataclass(frozen=True, slots=True)
class _KeyDelta:
    """One key's delta trace, computed again from its readings and its baseline's points when asked."""

    readings: Columns
    channel: int
    sign: np.int64
    knots: _Knots

    def __call__(self) -> np.ndarray:
        v = self.sign * self.readings[:, self.channel].astype(np.float64)
        # + 0.0 turns a -0.0 (a zero reading of a falling key less a zero baseline) into 0.0 and leaves
        # every other value as it is: a median of zeros then never depends on where numpy's partition
        # put a -0.0, and is never printed "-0.0".
        return v - self.knots.at_every_frame() + 0.0


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


def find_touches(t_s: np.ndarray, readings: Columns, names: Sequence[str], polarity: Sequence[int],
                 rate_hz: float, marks: Sequence[Mark] = (), min_touch_s: float = 0.1) -> list[KeyTrace]:
    """Per key: delta trace, touched stretches (from marks, else found), untouched and touched deltas.

    `readings` is frames x keys: an array, or anything that gives `shape` and one key's column as
    `readings[:, c]`. One key's float trace is alive at a time.
    """
    n, width = readings.shape
    pol = expand_polarity(polarity, width)
    trim = max(1, round(0.05 * rate_hz))
    marked = marked_stretches(marks, names, _searchsorted(t_s))
    found: dict[int, list[tuple[int, int]]] = {}
    sources: list[_KeyDelta] = []
    touched: list[np.ndarray] = []
    for c in range(width):
        v = pol[c] * readings[:, c].astype(np.float64)
        knots = _baseline_knots(v, rate_hz)
        delta = v - knots.at_every_frame() + 0.0  # never -0.0 (see `_KeyDelta`)
        del v
        found[c] = marked[c] if marked is not None else _find_runs(delta, rate_hz, min_touch_s)
        touched.append(_trimmed(delta, found[c], trim))
        sources.append(_KeyDelta(readings, c, pol[c], knots))
    busy = np.zeros(n, bool)  # any key touched, widened by a guard, is no use for noise
    guard = max(1, round(0.3 * rate_hz))
    for runs in found.values():
        for a, b in runs:
            busy[max(0, a - guard): b + guard] = True
    quiet_mask = ~busy
    if marked is not None and (q := mark_ranges(marks, "quiet-start", "quiet-end", None, _searchsorted(t_s))):
        quiet_mask = np.zeros(n, bool)
        for a, b in q:
            quiet_mask[a:b] = True
    return [KeyTrace(c, names[c], sources[c], found[c], quiet_mask, touched[c], marked is not None)
            for c in range(width)]


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


def mark_ranges(marks: Sequence[Mark], start_kind: str, end_kind: str, channel: str | None,
                to_frames: Callable[[np.ndarray], np.ndarray]) -> list[tuple[int, int]]:
    """[start, stop) frames between each `start_kind` mark and the next `end_kind` one (of `channel`, or of
    any with None), those holding at least one frame; `to_frames(times)` gives the first frame at or after
    each time (`np.searchsorted`)."""
    pairs, opened = [], None
    for m in sorted(marks, key=lambda m: m.t_s):
        if m.channel != channel and channel is not None:
            continue
        if m.kind == start_kind:
            opened = m.t_s
        elif m.kind == end_kind and opened is not None:
            pairs.append((opened, m.t_s))
            opened = None
    if not pairs:
        return []
    at = to_frames(np.array(pairs, np.float64).reshape(-1)).tolist()
    # A pair whose times hold no frame (both before the first frame or after the last: marks written
    # after the recording was cut short) marks nothing: it is left out, not kept as an empty touch.
    return [(a, b) for a, b in zip(at[0::2], at[1::2], strict=True) if b > a]


def marked_stretches(marks: Sequence[Mark], names: Sequence[str],
                     to_frames: Callable[[np.ndarray], np.ndarray]) -> dict[int, Ranges] | None:
    """Key -> its touches from the touch marks; None when the recording has no touch mark at all."""
    if not any(m.kind == "touch-start" for m in marks):
        return None
    return {c: mark_ranges(marks, "touch-start", "touch-end", name, to_frames)
            for c, name in enumerate(names)}


def _searchsorted(t_s: np.ndarray) -> Callable[[np.ndarray], np.ndarray]:
    return lambda times: np.searchsorted(t_s, times)
