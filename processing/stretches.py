"""The figures every tuning view shows, and the touch and quiet marks of a recording as frames.

`key_figures` gives noise pp and RMS, the median touch delta and both SNR forms, defined as
`processing.measure` does (`figures_from` the same from summed-up samples: streaming tuning).
`mark_ranges` / `marked_stretches` turn a recording's marks into [start, stop) frames. Where the touches
are found without marks is `processing.touch_search` (by passes over a recording of any length); the
same rule on whole arrays, the plain statement the tests hold it to, is `find_touches` in
tests/processing/tune_reference.py. `expand_polarity` gives each key its sign.
Pure numpy, no I/O.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from processing.frame_ranges import Ranges
from processing.recording import Mark
from processing.suggest import Samples


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
