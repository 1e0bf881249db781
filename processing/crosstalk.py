"""Two measures a practitioner asks for beside noise and SNR: crosstalk between keys, and noise while touched.

Crosstalk: touching key A moves a released key B. Those frames of B are not B's noise (a neighbour's finger
is not noise); they say by how much a touch on A moves B: the shift is the median of B's deltas while A
alone was held, less the median of B's own untouched deltas (counts, touch positive). As a share of B's
threshold it says how much of B's margin a touch on A uses up; above `FLAG_SHARE` a key is flagged.

Slider neighbours are not crosstalk: the pads of one slider are laid out so that a finger covers two at
once (that is how a slider finds the position between them), so a swipe moving a pad's neighbour is the
slider working. A pair of pads in the same slider (the profile's `[[slider]]`, `slider_of`) is reported
as slider neighbours: shown, never flagged, and left out of a key's worst crosstalk (`worst_by_target`).
Every other pair, a slider pad and a key outside it included, is judged as before.

Noise while touched: a finger couples mains hum (the body is an antenna) and its own tremor into the pad.
The touch level is removed with a centred running median of `LEVEL_WINDOW_S` over each touch on its own
(only frames with the whole window inside the touch are kept: no edge padding); what is left is the noise
while touched, RMS (population standard deviation) and pp, with the same spectrum and mains alias check as
the untouched noise (`processing.measure.spectrum_peak`).

Pure numpy, no I/O.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from processing.measure import MIN_SPECTRUM_SAMPLES, SpectrumPeak, spectrum_peak
from processing.slider import SliderSpec

# A touch on a neighbour that moves a key by more than this share of its threshold leaves too little of
# the margin for noise and for the finger on the key itself (common practice, no source: a third of the
# threshold is the usual warning line; from memory).
FLAG_SHARE = 0.3
# The touch level under a finger changes with pressure over tenths of a second and longer; hum aliases and
# tremor are faster. A 0.2 s running median follows the level and leaves those (common practice, no source).
LEVEL_WINDOW_S = 0.2
MIN_FRAMES = 8  # fewer frames than this give no figure (the same floor as the untouched noise)


@dataclass(frozen=True, slots=True)
class Coupling:
    """Touching `source` moves `target` by `shift_counts` (median, touch positive) over `frames` frames.
    `slider`: the slider both are pads of (slider neighbours: shown, never flagged), else None."""

    source: int
    target: int
    shift_counts: float
    frames: int
    threshold_counts: float | None
    slider: str | None = None

    @property
    def neighbours(self) -> bool:
        """True when source and target are pads of the same slider."""
        return self.slider is not None

    @property
    def share(self) -> float | None:
        """The shift as a share of the target's threshold (None without a threshold)."""
        if self.threshold_counts is None or self.threshold_counts <= 0:
            return None
        return self.shift_counts / self.threshold_counts

    def flagged(self, limit: float = FLAG_SHARE) -> bool:
        share = self.share
        return share is not None and abs(share) > limit and not self.neighbours


def slider_of(sliders: Iterable[SliderSpec]) -> dict[tuple[int, int], str]:
    """(pad, pad) -> the slider's name, both ways round, for every two pads of one slider."""
    out: dict[tuple[int, int], str] = {}
    for spec in sliders:
        for a in spec.pads:
            for b in spec.pads:
                if a != b:
                    out.setdefault((a, b), spec.name)
    return out


def largest_first(c: Coupling) -> tuple[float, float]:
    """Sort key: the largest share of the threshold first, then the largest shift."""
    return (-abs(c.share if c.share is not None else 0.0), -abs(c.shift_counts))


def untouched_zero(own: np.ndarray | Sequence[float]) -> float:
    """A key's own zero: the median of its untouched deltas (0 with fewer than `MIN_FRAMES`)."""
    own = np.asarray(own, np.float64)
    return float(np.median(own)) if len(own) >= MIN_FRAMES else 0.0


def couplings(untouched: Mapping[int, np.ndarray], during: Mapping[tuple[int, int], np.ndarray],
              thresholds: Mapping[int, float | None], sliders: Iterable[SliderSpec] = ()) -> list[Coupling]:
    """One `Coupling` per (source, target) in `during` (target's deltas while source alone was held) with
    at least `MIN_FRAMES` frames, measured against the target's `untouched` deltas (its own zero when it has
    fewer than `MIN_FRAMES`). Pairs of pads of one of `sliders` are slider neighbours. Sorted by the
    largest share (or shift) first."""
    neighbours = slider_of(sliders)
    out = []
    for (source, target), values in during.items():
        values = np.asarray(values, np.float64)
        if len(values) < MIN_FRAMES:
            continue
        zero = untouched_zero(untouched.get(target, ()))
        out.append(Coupling(source, target, float(np.median(values)) - zero, len(values),
                            thresholds.get(target), neighbours.get((source, target))))
    return sorted(out, key=largest_first)


def during_touches(deltas: np.ndarray, touched: np.ndarray, targets: Iterable[int] | None = None
                   ) -> dict[tuple[int, int], np.ndarray]:
    """(source, target) -> the target's deltas in the frames where `source` was the only key touched.

    `deltas` is frames x keys (touch positive), `touched` the same shape (True inside a key's touch).
    """
    touched = np.asarray(touched, bool)
    alone = touched & (touched.sum(axis=1) == 1)[:, None]
    width = deltas.shape[1]
    out: dict[tuple[int, int], np.ndarray] = {}
    for source in np.flatnonzero(alone.any(axis=0)).tolist():
        rows = alone[:, source]
        for target in (range(width) if targets is None else targets):
            if target != source:
                out[(source, target)] = np.asarray(deltas[rows, target])
    return out


def worst_by_target(found: Sequence[Coupling]) -> dict[int, Coupling]:
    """Each target's largest crosstalk (by share, else shift); slider neighbours are not crosstalk."""
    out: dict[int, Coupling] = {}
    for c in found:  # `couplings` sorts the largest first
        if not c.neighbours:
            out.setdefault(c.target, c)
    return out


def describe(c: Coupling, names: Sequence[str], limit: float = FLAG_SHARE) -> str:
    """"touching zone1 moves zone2 by +12.0 counts, 24 % of its threshold 50 (flagged: above 30 %)";
    slider neighbours end "(slider neighbours in duration, not crosstalk)"."""
    text = f"touching {names[c.source]} moves {names[c.target]} by {c.shift_counts:+.1f} counts"
    share = c.share
    if share is None:
        text += f" ({c.frames} frames; no threshold to compare)"
    else:
        text += f", {100 * share:.0f} % of its threshold {c.threshold_counts:g} ({c.frames} frames)"
    if c.neighbours:
        return f"{text}: slider neighbours in {c.slider}, not crosstalk"
    return text + (f": flagged, above {100 * limit:.0f} %" if c.flagged(limit) else "")


# ---------------------------------------------------------------- noise while touched


def running_median(values: np.ndarray, window: int) -> np.ndarray:
    """Centred running median over `window` (odd) frames, only where the whole window fits:
    len(values) - window + 1 values (none when shorter)."""
    x = np.asarray(values, np.float64)
    if window < 1 or window % 2 == 0:
        raise ValueError(f"the running median's window must be an odd number of frames, not {window}")
    if len(x) < window:
        return np.zeros(0)
    return np.median(np.lib.stride_tricks.sliding_window_view(x, window), axis=1)


def level_window(rate_hz: float, window_s: float = LEVEL_WINDOW_S) -> int:
    """The running median's window in frames at `rate_hz`: odd, at least 3."""
    n = max(3, round(window_s * rate_hz))
    return n if n % 2 else n + 1


def residuals(stretch: np.ndarray, window: int) -> np.ndarray:
    """One touch's deltas less their running-median level (the window's edges dropped)."""
    level = running_median(stretch, window)
    h = window // 2
    return np.asarray(stretch, np.float64)[h:len(stretch) - h] - level if len(level) else np.zeros(0)


@dataclass(frozen=True, slots=True)
class TouchedNoise:
    """Noise while touched: the touch level removed (`residuals`), over `samples` frames of `touches`."""

    rms_counts: float
    pp_counts: float
    samples: int
    touches: int
    window_frames: int
    peak: SpectrumPeak | None  # of the longest touch's residuals, with the mains alias check

    def hum(self) -> str:
        """The spectrum's verdict in a few words ("" when there was too little for one)."""
        return self.peak.brief() if self.peak is not None else ""


def touched_noise(stretches: Sequence[np.ndarray], rate_hz: float,
                  window_s: float = LEVEL_WINDOW_S) -> TouchedNoise | None:
    """`TouchedNoise` of the given touches (each one key's deltas through one touch), None with fewer than
    `MIN_FRAMES` residual frames in all."""
    window = level_window(rate_hz, window_s)
    parts = [r for r in (residuals(s, window) for s in stretches) if len(r)]
    if not parts or sum(len(p) for p in parts) < MIN_FRAMES:
        return None
    res = np.concatenate(parts)
    longest = max(parts, key=len)
    peak = spectrum_peak(longest, rate_hz) if len(longest) >= MIN_SPECTRUM_SAMPLES else None
    rms = float(np.std(res))
    return TouchedNoise(rms, float(res.max() - res.min()), len(res), len(parts), window, peak)


def describe_touched(t: TouchedNoise | None, rate_hz: float) -> str:
    """One line for detail panes and reports."""
    if t is None:
        return "noise while touched: too few touched frames"
    ms = 1000.0 * t.window_frames / rate_hz if rate_hz > 0 else math.nan
    touches = f"{t.touches} touch{'es' if t.touches != 1 else ''}"
    text = (f"noise while touched {t.pp_counts:.1f} pp, {t.rms_counts:.1f} RMS counts over {t.samples} "
            f"frames of {touches} (level removed by a {t.window_frames}-frame running median, {ms:.0f} ms)")
    return f"{text}; {t.peak.describe()}" if t.peak is not None else text
