"""Tuning suggestions from captured samples: threshold, hysteresis and debounce, each with its reason.

Pure functions. The rules are common practice, no source:
- threshold about half the typical touch delta, but at least the highest untouched delta plus one noise
  peak-to-peak above it ("well clear of the noise"); refused when that floor is above 3/4 of the signal;
- hysteresis about 15 % of the threshold (10-20 % is usual), kept so the release level stays above the
  highest untouched delta;
- debounce long enough to span the longest observed noise burst (a run of frames beyond 2 RMS) plus one
  frame, at least 2 frames and at most `max_debounce_s` (50 ms: a slower key feels sluggish) or 255 frames;
- every suggestion is a valid setting: threshold 1 .. 2^24, hysteresis below the threshold.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from processing.settings import MAX_COUNTS, MAX_DEBOUNCE_FRAMES, ChannelSettings


@dataclass(frozen=True, slots=True)
class Suggestion:
    threshold_counts: int
    hysteresis_counts: int
    touch_debounce_frames: int
    release_debounce_frames: int
    reasons: dict[str, str]
    signal_counts: float
    noise_pp_counts: float
    noise_rms_counts: float

    def apply(self, settings: ChannelSettings) -> ChannelSettings:
        return replace(settings, threshold_counts=self.threshold_counts,
                       hysteresis_counts=self.hysteresis_counts,
                       touch_debounce_frames=self.touch_debounce_frames,
                       release_debounce_frames=self.release_debounce_frames)


@dataclass(frozen=True, slots=True)
class Refusal:
    reason: str


def longest_run(mask: np.ndarray) -> int:
    """Length of the longest run of True values."""
    best = run = 0
    for v in np.asarray(mask, bool).tolist():
        run = run + 1 if v else 0
        best = max(best, run)
    return best


def _debounce(run: int, rate_hz: float, max_debounce_s: float) -> tuple[int, bool]:
    """Frames to span a run of `run` frames, capped at `max_debounce_s` and at what the detector accepts."""
    cap = min(MAX_DEBOUNCE_FRAMES, max(2, math.floor(max_debounce_s * rate_hz)))
    want = max(2, run + 1)
    return min(want, cap), want > cap


def _threshold(signal: float, top: int, pp: int) -> tuple[int, str] | Refusal:
    """Half the signal, raised to clear the noise top by one pp; refused when that is near the signal."""
    floor = max(1, top + max(pp, 1))
    half = math.floor(signal / 2)
    if floor > math.floor(signal * 3 / 4) or floor > MAX_COUNTS:
        return Refusal(f"the touch signal (median {signal:g} counts) does not clear the noise: "
                       f"a threshold must be at least {floor} to clear it (highest untouched delta {top}, "
                       f"pp {pp}), above 3/4 of the signal; "
                       "reduce the noise or strengthen the touch before tuning")
    if half > MAX_COUNTS:
        return MAX_COUNTS, (f"half the typical touch delta ({signal:g} counts) is more than the detector "
                            f"takes: at most {MAX_COUNTS}")
    if half >= floor:
        return half, (f"half the typical touch delta ({signal:g} counts); clears "
                      f"the highest untouched delta ({top}) by {half - top} counts")
    return floor, (f"raised above half the touch delta ({half}) to the noise top {top} "
                   f"plus one noise pp ({pp}), so noise cannot reach it")


def _hysteresis(threshold: int, top: int, fraction: float) -> tuple[int, str]:
    """About `fraction` of the threshold, cut so the release level stays above the noise top."""
    hyst = min(max(1, round(threshold * fraction)), threshold - 1)
    if threshold - hyst > top:
        return hyst, f"{fraction:.0%} of the threshold"
    hyst = max(0, threshold - top - 1)
    return hyst, (f"cut so the release level ({threshold - hyst}) stays above the highest untouched "
                  f"delta ({top})")


@dataclass(frozen=True, slots=True)
class Samples:
    """What a suggestion needs of one set of delta samples (counts): how many, lowest, highest, RMS
    (population standard deviation) and median. `of(values)` takes them from an array; streaming tuning
    (`processing.key_stats`) gathers them a piece at a time."""

    count: int
    low: int
    high: int
    rms: float
    median: float

    @classmethod
    def of(cls, values: np.ndarray) -> Samples:
        v = np.asarray(values, np.int64)
        if not len(v):
            return cls(0, 0, 0, 0.0, math.nan)
        return cls(len(v), int(v.min()), int(v.max()), float(np.std(v)), float(np.median(v)))


@dataclass(frozen=True, slots=True)
class Levels:
    """The first half of a suggestion: threshold and hysteresis, from the samples' figures alone. The
    debounces need two runs that depend on these levels (`burst_level`, `release_level`)."""

    threshold_counts: int
    hysteresis_counts: int
    reasons: dict[str, str]
    signal_counts: float
    noise_pp_counts: int
    noise_rms_counts: float
    quiet_median: float

    @property
    def release_level(self) -> int:
        """A touched delta below this is a dropout (the release debounce spans the longest run of them)."""
        return self.threshold_counts - self.hysteresis_counts

    def is_burst(self, quiet: np.ndarray) -> np.ndarray:
        """Untouched deltas beyond 2 RMS of their median (the touch debounce spans the longest run)."""
        rms = self.noise_rms_counts
        return np.abs(np.asarray(quiet, np.int64) - self.quiet_median) > 2 * rms if rms > 0 else \
            np.zeros(len(quiet), bool)


def levels(quiet: Samples, held: Samples, *, hysteresis_fraction: float = 0.15,
           min_samples: int = 16) -> Levels | Refusal:
    """Threshold and hysteresis from untouched (`quiet`) and touched (`held`) samples, or why not."""
    if quiet.count < min_samples or held.count < min_samples:
        return Refusal(f"need at least {min_samples} untouched and {min_samples} touched frames; "
                       f"have {quiet.count} and {held.count}: capture longer")
    top, pp = quiet.high, quiet.high - quiet.low
    signal = held.median
    if signal <= top:
        return Refusal(f"the touch signal (median {signal:g} counts) does not rise above the noise (highest "
                       f"untouched delta {top} counts): check the overlay, electrode and grounding")
    chosen = _threshold(signal, top, pp)
    if isinstance(chosen, Refusal):
        return chosen
    reasons: dict[str, str] = {}
    threshold, reasons["threshold_counts"] = chosen
    hyst, reasons["hysteresis_counts"] = _hysteresis(threshold, top, hysteresis_fraction)
    return Levels(threshold, hyst, reasons, signal, pp, quiet.rms, quiet.median)


def debounced(lv: Levels, burst: int, dropout: int, rate_hz: float, *,
              max_debounce_s: float = 0.05) -> Suggestion:
    """The suggestion, given the longest noise burst (`Levels.is_burst` run, frames) among the untouched
    samples and the longest dropout (below `Levels.release_level`) among the touched ones."""
    reasons = dict(lv.reasons)
    touch_db, capped = _debounce(burst, rate_hz, max_debounce_s)
    span_ms = f"{1000 * touch_db / rate_hz:.0f} ms"
    reasons["touch_debounce_frames"] = (
        f"noise bursts beyond 2 RMS lasted up to {_frames(burst)}; {_frames(touch_db)} ({span_ms}) span them"
        if burst else f"no noise burst beyond 2 RMS was seen; {_frames(touch_db)} ({span_ms}) still guard "
        "against a single stray frame")
    if capped:
        reasons["touch_debounce_frames"] += f" (capped at {_frames(touch_db)}, to stay quick)"
    release_db, capped = _debounce(dropout, rate_hz, max_debounce_s)
    reasons["release_debounce_frames"] = (
        f"the touched delta dipped below the release level for up to {_frames(dropout)}; "
        f"{_frames(release_db)} span that" if dropout else "the touched delta never dipped below the release "
        f"level; {_frames(release_db)} still hold a touch through a single stray frame")
    if capped:
        reasons["release_debounce_frames"] += f" (capped at {_frames(release_db)})"
    return Suggestion(lv.threshold_counts, lv.hysteresis_counts, touch_db, release_db, reasons,
                      lv.signal_counts, float(lv.noise_pp_counts), lv.noise_rms_counts)


def suggest(untouched_delta: np.ndarray, touched_delta: np.ndarray, rate_hz: float, *,
            hysteresis_fraction: float = 0.15, max_debounce_s: float = 0.05,
            min_samples: int = 16) -> Suggestion | Refusal:
    """Suggest settings from untouched and touched delta samples of one key (counts)."""
    quiet = np.asarray(untouched_delta, np.int64)
    held = np.asarray(touched_delta, np.int64)
    lv = levels(Samples.of(quiet), Samples.of(held), hysteresis_fraction=hysteresis_fraction,
                min_samples=min_samples)
    if isinstance(lv, Refusal):
        return lv
    burst = longest_run(lv.is_burst(quiet))
    dropout = longest_run(held < lv.release_level)
    return debounced(lv, burst, dropout, rate_hz, max_debounce_s=max_debounce_s)


def _frames(count: int) -> str:
    return f"{count} frame{'' if count == 1 else 's'}"
