"""Suggestions for every key of a recording: touches from the marks or found, figures, new settings.

Pure: a `Recording` and a base profile in, a `TuneResult` out (the new profile, and per key what was
measured, the verdict, the suggestion or the reason for refusing one); `limits_from_result` turns a
good unit's result into production limits. `padtune tune` prints and saves it (rows for its table and
JSON: `tui.headless.tuning`); the HTML report draws it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from processing.measure import VerdictBounds
from processing.profile import Profile, profile_for, profile_from_board
from processing.recording_format import Recording
from processing.settings import ChannelSettings, Limits
from processing.startup import Learned, Startup
from processing.stretches import KeyFigures, KeyTrace, find_touches, key_figures
from processing.suggest import Refusal, Suggestion, suggest
from protocol.errors import UserError

MIN_FRAMES = 32


@dataclass
class KeyResult:
    channel: int
    name: str
    figures: KeyFigures
    verdict: str
    outcome: Suggestion | Refusal
    before: ChannelSettings
    after: ChannelSettings
    trace: KeyTrace

    @property
    def changed(self) -> bool:
        return self.before != self.after


@dataclass
class TuneResult:
    profile: Profile
    keys: list[KeyResult]
    t_s: np.ndarray
    rate_hz: float
    from_marks: bool
    source: str
    frames: int


def base_profile(rec: Recording, base: Profile | None) -> Profile:
    width = rec.channels or 0
    if base is not None:
        if base.channels != width:
            raise UserError(f"the profile is for {base.channels} channels, the recording has {width}: "
                            "give the profile made for this board, or leave --profile out")
        return base
    info = rec.info
    if info is not None and (info.channels or len(info.names)) == width:
        return profile_from_board(info)
    return profile_for(width, rec.names if len(rec.names) == width else ())


def learned_polarity(t_s: np.ndarray, readings: np.ndarray, rate_hz: float) -> dict[int, int]:
    """Channel -> direction, from its first clear touch that comes back in the recording, as the live
    session learns it (channels never touched are left out)."""
    width = readings.shape[1]
    steps = Startup(width, [False] * width, [True] * width, rate_hz).advance(readings, t_s)
    return {step.channel: step.sign for step in steps if isinstance(step, Learned)}


def tune_recording(rec: Recording, base: Profile | None = None,
                   bounds: VerdictBounds | None = None) -> TuneResult:
    t_s, _, readings = rec.arrays()
    if len(t_s) < MIN_FRAMES:
        raise UserError(f"{rec.path}: only {len(t_s)} frames; record at least a few seconds with each key "
                        "touched")
    rate_hz = rec.rate_hz or 100.0
    profile = base_profile(rec, base)
    info = rec.info
    polarity = tuple(info.polarity) if info and info.polarity else tuple(profile.polarity)
    if not polarity:  # nobody says: each key's first touch that comes back (ALGORITHM.md, first contact)
        learned = learned_polarity(t_s, readings, rate_hz)
        polarity = tuple(learned.get(c, 1) for c in range(profile.channels))  # +1 for a key never touched
        if len(learned) == profile.channels:  # a profile lists all or none
            profile = replace(profile, polarity=polarity)
    traces = find_touches(t_s, readings, profile.names, polarity, rate_hz, rec.marks)
    bounds = bounds or VerdictBounds()
    keys = []
    for trace in traces:
        c = trace.channel
        untouched = np.rint(trace.quiet).astype(np.int64)
        touched = np.rint(trace.touched).astype(np.int64)
        figures = key_figures(untouched, touched)
        outcome = suggest(untouched, touched, rate_hz)
        if not len(trace.stretches):
            outcome = Refusal("no touch found on this key: record it being touched (or mark the touches)")
        before = profile.settings_for(c)
        after = outcome.apply(before) if isinstance(outcome, Suggestion) else before
        keys.append(KeyResult(c, profile.names[c], figures, bounds.verdict(figures.snr_pp), outcome, before,
                              after, trace))
        profile = profile.with_settings(c, after)
    profile = replace(profile, rate_hz=rate_hz)
    return TuneResult(profile, keys, t_s, rate_hz, bool(traces and traces[0].from_marks), rec.path, len(t_s))


def limits_from_result(result: TuneResult, readings: np.ndarray, baseline_margin: float = 0.2) -> Limits:
    """Acceptance limits for `padtune check` from a recording of a good unit.

    Common practice, no source: the baseline range is the good unit's lowest and highest baseline
    widened by `baseline_margin` (20 %), the noise limits three times its noisiest key, and the SNR
    limit 70 % of its weakest key (so the same design passes with margin and a bad unit does not).
    """
    baselines = np.median(readings, axis=0)
    pps = [k.figures.noise_pp_counts for k in result.keys if k.figures.noise_pp_counts is not None]
    rmss = [k.figures.noise_rms_counts for k in result.keys if k.figures.noise_rms_counts is not None]
    snrs = [k.figures.snr_pp for k in result.keys
            if k.figures.snr_pp is not None and np.isfinite(k.figures.snr_pp) and k.trace.stretches]
    return Limits(
        max_noise_pp_counts=float(math.ceil(3 * max(pps))) if pps and max(pps) > 0 else None,
        max_noise_rms_counts=round(3 * max(rmss), 1) if rmss and max(rmss) > 0 else None,
        min_snr_pp=round(0.7 * min(snrs), 1) if snrs else None,
        baseline_min_counts=math.floor(float(baselines.min()) * (1 - baseline_margin)),
        baseline_max_counts=math.ceil(float(baselines.max()) * (1 + baseline_margin)),
    )
