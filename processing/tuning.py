"""Suggestions for every key of a recording: touches from the marks or found, figures, new settings.

Pure: a `Recording` and a base profile in, a `TuneResult` out (the new profile, and per key what was
measured, the verdict, the suggestion or the reason for refusing one). A key without a suggestion is
*unmeasured*: it keeps its settings, `TuneResult.unmeasured()` names it and the profile marks it
(`measured = false`) unless a base profile already held settings for it as measured: the rule is
`keeps_claim` / `measured_marks`, which the live screen's guided capture applies too.
`limits_from_result` turns a good unit's result into production limits, each channel its own.
`padtune tune` prints and saves it (rows for its table and JSON: `tui.headless.tuning`); the HTML
report draws it.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass, replace

import numpy as np

from processing.measure import VerdictBounds
from processing.profile import Profile, profile_for, profile_from_board
from processing.recording_format import Recording
from processing.settings import LIMIT_KEYS, ChannelSettings, Limits
from processing.startup import Learned, Startup
from processing.stretches import Columns, KeyFigures, KeyTrace, find_touches, key_figures
from processing.suggest import Refusal, Suggestion, suggest
from processing.tune_frames import TuneFrames
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

    @property
    def measured(self) -> bool:
        """True when this recording gave the key a suggestion (its settings come from its own figures)."""
        return isinstance(self.outcome, Suggestion)


@dataclass
class TuneResult:
    profile: Profile
    keys: list[KeyResult]
    t_s: np.ndarray
    rate_hz: float
    from_marks: bool
    source: str
    frames: int

    def unmeasured(self) -> list[KeyResult]:
        """Keys this recording did not measure (no touch found, or a suggestion refused), in order."""
        return [k for k in self.keys if not k.measured]


def keeps_claim(base: Profile | None, channel: int) -> bool:
    """Whether a key not measured now may still be written as measured: only when `base` (the profile its
    settings came from) held it as measured. Settings from defaults (no base), or a key the base marked,
    are not a measurement."""
    return base is not None and 0 <= channel < base.channels and channel not in base.unmeasured_channels


def measured_marks(base: Profile | None, measured: Iterable[int],
                   unmeasured: Iterable[int]) -> dict[int, bool]:
    """Channel -> whether the profile may call it measured, after a run that measured `measured` and not
    `unmeasured` (`tune_recording`, the guided capture's results): measured keys are; the others keep the
    claim `base` gave them (`keeps_claim`), else they are marked `measured = false`."""
    out = {c: keeps_claim(base, c) for c in unmeasured}
    out.update({c: True for c in measured})
    return out


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


def learned_polarity(t_s: np.ndarray, readings: Columns, rate_hz: float) -> dict[int, int]:
    """Channel -> direction, from its first clear touch that comes back in the recording, as the live
    session learns it (channels never touched are left out). `readings` held in pieces
    (`ChunkedReadings`) go through a piece at a time, as a live session's blocks do (the learner's result
    does not depend on how the frames are cut: ALGORITHM.md, first contact)."""
    width = readings.shape[1]
    startup = Startup(width, [False] * width, [True] * width, rate_hz)
    if isinstance(readings, np.ndarray):
        steps = startup.advance(readings, t_s)
    else:
        steps, at = [], 0
        for piece in readings.pieces():
            steps.extend(startup.advance(piece, t_s[at:at + len(piece)]))
            at += len(piece)
    return {step.channel: step.sign for step in steps if isinstance(step, Learned)}


def tune_recording(rec: Recording | TuneFrames, base: Profile | None = None,
                   bounds: VerdictBounds | None = None) -> TuneResult:
    """Every key of `rec` measured and tuned. `rec` is a `Recording`, or the compact `TuneFrames` that
    `padtune tune` reads a stream into (`processing.tune_frames`: the same answers in less memory)."""
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
        untouched = np.rint(trace.quiet).astype(np.int64)  # one key's trace at a time, let go after
        touched = np.rint(trace.touched).astype(np.int64)
        figures = key_figures(untouched, touched)
        outcome = suggest(untouched, touched, rate_hz)
        if not len(trace.stretches):
            outcome = Refusal("no touch found on this key: record it being touched (or mark the touches)")
        before = profile.settings_for(c)
        after = outcome.apply(before) if isinstance(outcome, Suggestion) else before
        keys.append(KeyResult(c, profile.names[c], figures, bounds.verdict(figures.snr_pp), outcome, before,
                              after, trace))
        # Unmeasured: settings from defaults, not from this key (the rule: `measured_marks`).
        ok = isinstance(outcome, Suggestion)
        marks = measured_marks(base, [c] if ok else [], [] if ok else [c])
        profile = profile.with_settings(c, after).with_measured(c, marks[c])
    profile = replace(profile, rate_hz=rate_hz)
    return TuneResult(profile, keys, t_s, rate_hz, bool(traces and traces[0].from_marks), rec.path, len(t_s))


# Margins of `limits_from_result` (common practice, no source; from memory of production test plans):
# a pad's count varies unit to unit with the RC parts' tolerance (5-10 %), the overlay's thickness and
# its adhesive, and drifts with temperature, so a good unit's own baseline is widened by 20 % each side;
# a short or an open pad moves it by far more (a missing pad loses most of its capacitance). Noise pp
# grows with the number of frames it is taken over and with the room's interference, so the limit is
# three times the good unit's own; a channel quieter than one count is treated as one count, so a
# perfectly quiet reference does not give a limit no real unit meets. The SNR floor is 70 % of the
# weakest key's (a finger is not a fixture), for every key alike.
NOISE_LIMIT_FACTOR = 3.0
MIN_NOISE_PP_COUNTS = 1.0
MIN_NOISE_RMS_COUNTS = 0.3
SNR_LIMIT_SHARE = 0.7


def _untouched_readings(result: TuneResult, readings: Columns, c: int) -> np.ndarray:
    """A channel's readings outside its own touches (edges of a touch are in the touch's stretch)."""
    keep = np.ones(readings.shape[0], bool)
    for start, stop in result.keys[c].trace.stretches:
        keep[start:stop] = False
    return readings[:, c][keep] if keep.any() else np.zeros(0)


def channel_limits(result: TuneResult, readings: Columns, c: int, baseline_margin: float) -> Limits:
    """One channel's own baseline range and noise limits from a good unit (see the margins above)."""
    key = result.keys[c]
    untouched = _untouched_readings(result, readings, c)
    pp, rms = key.figures.noise_pp_counts, key.figures.noise_rms_counts
    lo = hi = None
    if len(untouched):
        lo = math.floor(float(untouched.min()) * (1 - baseline_margin))
        hi = max(math.ceil(float(untouched.max()) * (1 + baseline_margin)), lo + 1)
    return Limits(
        max_noise_pp_counts=float(math.ceil(NOISE_LIMIT_FACTOR * max(pp, MIN_NOISE_PP_COUNTS)))
        if pp is not None else None,
        max_noise_rms_counts=round(NOISE_LIMIT_FACTOR * max(rms, MIN_NOISE_RMS_COUNTS), 1)
        if rms is not None else None,
        baseline_min_counts=lo, baseline_max_counts=hi)


def limits_from_result(result: TuneResult, readings: Columns,
                       baseline_margin: float = 0.2) -> tuple[Limits, dict[int, Limits]]:
    """Acceptance limits for `padtune check` from a recording of a good unit: `[limits]` (the SNR floor,
    and the whole unit's band and noise for any channel without its own) and each channel's own.

    Each channel gets its own baseline range (its lowest and highest untouched reading widened by
    `baseline_margin`) and noise limits, so a pad that drifts to another pad's count fails. The
    margins and where they come from are above (`NOISE_LIMIT_FACTOR`, ...).
    """
    own = {c: channel_limits(result, readings, c, baseline_margin) for c in range(len(result.keys))}
    snrs = [k.figures.snr_pp for k in result.keys
            if k.measured and k.figures.snr_pp is not None and np.isfinite(k.figures.snr_pp)]
    pps = [v.max_noise_pp_counts for v in own.values() if v.max_noise_pp_counts is not None]
    rmss = [v.max_noise_rms_counts for v in own.values() if v.max_noise_rms_counts is not None]
    los = [v.baseline_min_counts for v in own.values() if v.baseline_min_counts is not None]
    his = [v.baseline_max_counts for v in own.values() if v.baseline_max_counts is not None]
    common = Limits(max_noise_pp_counts=max(pps, default=None), max_noise_rms_counts=max(rmss, default=None),
                    min_snr_pp=round(SNR_LIMIT_SHARE * min(snrs), 1) if snrs else None,
                    baseline_min_counts=min(los, default=None), baseline_max_counts=max(his, default=None))
    return common, {c: replace(v, min_snr_pp=common.min_snr_pp) for c, v in own.items()}


def with_limits(profile: Profile, common: Limits, own: dict[int, Limits]) -> Profile:
    """`profile` with `[limits]` = `common` and each channel's own limits (where they differ)."""
    out = replace(profile, limits=common, channel_limits={})
    for c, limits in own.items():
        # A channel keeps what [limits] sets and it could not measure (TOML cannot unset a key).
        filled = replace(limits, **{k: getattr(common, k) for k in LIMIT_KEYS if getattr(limits, k) is None})
        out = out.with_limits(c, filled)
    return out
