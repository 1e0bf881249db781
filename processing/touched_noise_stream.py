"""Noise while touched for every key, measured from passes over the deltas: any recording, bounded memory.

`processing.crosstalk.touched_noise` takes each touch's whole delta trace. `touched_noise_by_key` gives
the same `TouchedNoise` per key from `DeltaPasses` (pieces cut anywhere, a touch included), never holding
a touch's trace:

- Residuals: a touch's deltas less their centred running median (`crosstalk.residuals`). A window of
  `window` frames ending in this piece may begin in an earlier one, so each touch in progress keeps a carry
  of its last `window - 1` deltas; the carry and the piece's part of the touch together hold every window
  ending in the piece, each window's median taken over exactly the same values as the whole-trace form, so
  the residuals are the same whatever the cuts.
- RMS: two passes (the textbook two-pass variance, Chan, Golub & LeVeque 1983, "Algorithms for computing
  the sample variance"; from memory): the first sums the residuals for their mean, the second sums the
  squared deviations from that mean, with the sum of the deviations as a correction (the "corrected
  two-pass" form) so a mean off in its last bits does not leak in. Both sums are compensated (Neumaier)
  over the pieces' numpy sums, so their error does not grow with the number of pieces. Memory is a few
  floats per key.
- pp, samples, touches: counts and a min/max, exact.
- Spectrum: of the longest touch's residuals (the first longest in the key's list, as `touched_noise`),
  known before any pass from the touches' lengths. Its residuals are gathered in a pass and the spectrum
  taken, a batch of keys per pass: the two passes above carry the first two batches, and keys whose long
  touches do not fit (`SPECTRUM_BUDGET` residuals per pass, all keys together) get passes of their own.
  A touch longer than `SPECTRUM_CAP` residuals (17 minutes at 1 kHz, 52 s at 20 kHz) gives the spectrum
  of its first `SPECTRUM_CAP` (the one rule where this differs from `touched_noise`: a spectrum over more
  than a million frames is not held).

Memory: per key the carry of the touches in progress (`window - 1` floats each; one touch at a time for
normalised touches); the spectrum buffers, `SPECTRUM_BUDGET` residuals at most. Pure numpy, no I/O.
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field

import numpy as np

from processing.crosstalk import LEVEL_WINDOW_S, MIN_FRAMES, TouchedNoise, level_window, running_median
from processing.frame_source import DeltaPasses
from processing.measure import MIN_SPECTRUM_SAMPLES, SpectrumPeak, spectrum_peak
from processing.running_sum import RunningSum

SPECTRUM_CAP = 1 << 20  # residuals at most in a key's spectrum (the first of its longest touch)
SPECTRUM_BUDGET = 1 << 20  # residuals held for spectra in one pass, all keys together (8 MiB)


@dataclass(slots=True)
class _Touch:
    """One touch of one key in a pass: where it is, and the deltas its next windows still need."""

    index: int  # its place in the key's list of touches
    start: int
    stop: int
    carry: np.ndarray = field(default_factory=lambda: np.zeros(0))


def _residual_count(frames: int, window: int) -> int:
    return max(0, frames - window + 1)


def _feed(touch: _Touch, values: np.ndarray, window: int) -> np.ndarray:
    """The residuals of the windows that end in `values` (the touch's next deltas); keeps the carry."""
    buf = np.concatenate([touch.carry, np.asarray(values, np.float64)])
    keep = window - 1
    if len(buf) < window:
        touch.carry = buf
        return np.zeros(0)
    level = running_median(buf, window)
    h = window // 2
    touch.carry = buf[len(buf) - keep:].copy()
    return buf[h:len(buf) - h] - level


class _Key:
    """One key's touches in frame order and what a pass has found of them so far."""

    def __init__(self, runs: Sequence[tuple[int, int]], window: int) -> None:
        self.runs = [(i, int(a), int(b)) for i, (a, b) in enumerate(runs)]
        counts = [_residual_count(b - a, window) for _, a, b in self.runs]
        self.samples = sum(counts)
        self.touches = sum(1 for n in counts if n)
        best = max(counts, default=0)
        self.longest = counts.index(best) if best else -1  # first longest, as `max(parts, key=len)`
        self.longest_samples = best
        self.order = sorted(self.runs, key=lambda r: (r[1], r[0]))

    def start_pass(self) -> None:
        self.next = 0
        self.live: list[_Touch] = []

    def walk(self, start: int, column: np.ndarray, window: int) -> Iterator[tuple[int, np.ndarray]]:
        """(touch index, residuals) of this key's touches inside the piece [start, start + len(column))."""
        stop = start + len(column)
        while self.next < len(self.order) and self.order[self.next][1] < stop:
            i, a, b = self.order[self.next]
            self.live.append(_Touch(i, a, b))
            self.next += 1
        still = []
        for t in self.live:
            a, b = max(t.start, start), min(t.stop, stop)
            if b > a:
                res = _feed(t, column[a - start:b - start], window)
                if len(res):
                    yield t.index, res
            if t.stop > stop:
                still.append(t)
        self.live = still

    def end_pass(self, frames: int) -> None:
        if self.live or self.next < len(self.order):
            i, a, b = (self.live[0].index, self.live[0].start, self.live[0].stop) if self.live \
                else self.order[self.next]
            raise ValueError(f"touch {i} [{a}, {b}) runs past the last of {frames} frames")


def _check(stretches: Sequence[Sequence[tuple[int, int]]]) -> None:
    for c, runs in enumerate(stretches):
        for a, b in runs:
            if a < 0 or b < a:
                raise ValueError(f"key {c}: a touch must be [start, stop) with 0 <= start <= stop, "
                                 f"not [{a}, {b})")


def _passes(deltas: DeltaPasses, keys: dict[int, _Key], window: int
            ) -> Iterator[tuple[int, int, np.ndarray]]:
    """One pass: (key, touch index, residuals) in frame order, for the keys in `keys`."""
    for k in keys.values():
        k.start_pass()
    at = 0
    for start, piece in deltas():
        if start != at:
            raise ValueError(f"a pass's pieces must follow on: piece at frame {start}, expected {at}")
        for c, k in keys.items():
            for index, res in k.walk(start, piece[:, c], window):
                yield c, index, res
        at = start + len(piece)
    for k in keys.values():
        k.end_pass(at)


def _spectrum_batches(keys: dict[int, _Key]) -> list[list[int]]:
    """The keys whose longest touch gives a spectrum, packed in order into batches whose buffers together
    hold at most `SPECTRUM_BUDGET` residuals (one batch per pass)."""
    batches: list[list[int]] = []
    room = 0
    for c, k in keys.items():
        size = min(k.longest_samples, SPECTRUM_CAP)
        if size < MIN_SPECTRUM_SAMPLES:
            continue
        if not batches or size > room:
            batches.append([])
            room = SPECTRUM_BUDGET
        batches[-1].append(c)
        room -= size
    return batches


class _Spectra:
    """The residuals of the longest touch of each key in `batch`, gathered in one pass, then their peaks."""

    def __init__(self, keys: dict[int, _Key], batch: Sequence[int]) -> None:
        self.keys = keys
        self.parts: dict[int, list[np.ndarray]] = {c: [] for c in batch}
        self.held = dict.fromkeys(batch, 0)

    def take(self, c: int, index: int, res: np.ndarray) -> None:
        if c in self.parts and index == self.keys[c].longest and self.held[c] < SPECTRUM_CAP:
            part = res[:SPECTRUM_CAP - self.held[c]]
            self.parts[c].append(part.copy())
            self.held[c] += len(part)

    def peaks(self, rate_hz: float) -> dict[int, SpectrumPeak | None]:
        out = {}
        for c, parts in self.parts.items():
            longest = np.concatenate(parts) if parts else np.zeros(0)
            out[c] = spectrum_peak(longest, rate_hz) if len(longest) >= MIN_SPECTRUM_SAMPLES else None
        self.parts.clear()
        return out


def touched_noise_by_key(deltas: DeltaPasses, stretches: Sequence[Sequence[tuple[int, int]]],
                         rate_hz: float, window_s: float = LEVEL_WINDOW_S) -> list[TouchedNoise | None]:
    """Per key c, `crosstalk.touched_noise([full[a:b, c] for a, b in stretches[c]], rate_hz, window_s)`
    of the whole delta array `full` that `deltas` passes over (see the module's docstring for how, and for
    the spectrum cap). Touches must lie inside the recording; two passes (none when no key has
    `MIN_FRAMES` residuals), more only when the keys' longest touches are too long to gather in two."""
    _check(stretches)
    window = level_window(rate_hz, window_s)
    keys = {c: _Key(runs, window) for c, runs in enumerate(stretches)}
    keys = {c: k for c, k in keys.items() if k.touches and k.samples >= MIN_FRAMES}
    out: list[TouchedNoise | None] = [None] * len(stretches)
    if not keys:
        return out
    sums = {c: RunningSum() for c in keys}
    low = dict.fromkeys(keys, math.inf)
    high = dict.fromkeys(keys, -math.inf)
    batches = _spectrum_batches(keys)
    peaks: dict[int, SpectrumPeak | None] = {}
    spectra = _Spectra(keys, batches.pop(0) if batches else [])
    for c, index, res in _passes(deltas, keys, window):
        sums[c].add(float(np.sum(res)))
        low[c], high[c] = min(low[c], float(res.min())), max(high[c], float(res.max()))
        spectra.take(c, index, res)
    peaks.update(spectra.peaks(rate_hz))
    mean = {c: sums[c].value / keys[c].samples for c in keys}
    squares = {c: RunningSum() for c in keys}
    offsets = {c: RunningSum() for c in keys}
    spectra = _Spectra(keys, batches.pop(0) if batches else [])
    for c, index, res in _passes(deltas, keys, window):
        dev = res - mean[c]
        squares[c].add(float(np.dot(dev, dev)))
        offsets[c].add(float(np.sum(dev)))
        spectra.take(c, index, res)
    peaks.update(spectra.peaks(rate_hz))
    for batch in batches:  # more long touches than one pass's buffers hold: a pass for each batch more
        spectra = _Spectra(keys, batch)
        for c, index, res in _passes(deltas, {c: keys[c] for c in batch}, window):
            spectra.take(c, index, res)
        peaks.update(spectra.peaks(rate_hz))
    for c, k in keys.items():
        n = k.samples
        m2 = max(0.0, squares[c].value - offsets[c].value ** 2 / n)
        out[c] = TouchedNoise(math.sqrt(m2 / n), high[c] - low[c], n, k.touches, window, peaks.get(c))
    return out
