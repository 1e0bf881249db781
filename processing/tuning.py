"""Suggestions for every key of a recording: touches from the marks or found, figures, new settings.

Pure: frames and a base profile in, a `TuneResult` out (the new profile, and per key what was measured,
the verdict, the suggestion or the reason for refusing one, its noise while touched, and the crosstalk
between keys). The frames come as a `processing.frame_source.FrameSource` that can be gone through again
and again (`padtune tune` spools a recording to a temporary file: `processing.frame_spool`), and nothing
frames-long is ever held: the baselines are points (`processing.baseline_stream`), the touches and quiet
frames ranges (`processing.touch_search`), each figure a pass or an exact selection (`processing.key_stats`,
`processing.order_stats`), so memory does not grow with the recording's length. A `Recording` already in
memory is served the same way (`ArraySource`). The whole-array form of the same rule is
`processing.stretches.find_touches` (the reference the tests hold this to).

A key without a suggestion is *unmeasured*: it keeps its settings, `TuneResult.unmeasured()` names it and
the profile marks it (`measured = false`) unless a base profile already held settings for it as measured:
the rule is `keeps_claim` / `measured_marks`, which the live screen's guided capture applies too.
`limits_from_result` turns a good unit's result into production limits, each channel its own.
`padtune tune` prints and saves it (rows for its table and JSON: `tui.headless.tuning`); the HTML
report draws it.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass, replace
from typing import Protocol

import numpy as np

from processing import frame_ranges
from processing.baseline_stream import Baselines, WindowMedians, baselines_from, window_frames
from processing.crosstalk import Coupling, TouchedNoise
from processing.crosstalk_stream import couplings_streaming
from processing.frame_source import PIECE_FRAMES, ArraySource, FrameSource, RowStore
from processing.key_stats import KeySamples
from processing.measure import VerdictBounds
from processing.profile import Profile, profile_for, profile_from_board
from processing.reading_extremes import untouched_extremes
from processing.recording_format import Mark, Recording
from processing.settings import LIMIT_KEYS, ChannelSettings, Limits
from processing.startup import Learned, Startup
from processing.stretches import KeyFigures, expand_polarity, figures_from
from processing.suggest import Levels, Refusal, Suggestion, debounced, levels
from processing.touch_search import Touches, find_touches_streaming
from processing.touched_noise_stream import touched_noise_by_key
from protocol.errors import UserError
from protocol.events import BoardInfo

MIN_FRAMES = 32


class Frames(Protocol):
    """What tuning reads of a recording besides its frames (a `Recording`, a `FrameSpool`)."""

    path: str
    marks: list[Mark]

    @property
    def info(self) -> BoardInfo | None: ...

    @property
    def names(self) -> tuple[str, ...]: ...

    @property
    def channels(self) -> int | None: ...

    @property
    def rate_hz(self) -> float | None: ...


class SourceFrames(FrameSource, Frames, Protocol):
    """Frames served in passes that also say what `Frames` says (`processing.frame_spool.FrameSpool`)."""


@dataclass(frozen=True)
class KeyTouches:
    """Where one key was touched (`stretches`, [start, stop) frames) and how many frames its figures rest
    on: touched frames (edges trimmed) and untouched (quiet) frames."""

    stretches: list[tuple[int, int]]
    touched_frames: int
    quiet_frames: int
    from_marks: bool


@dataclass
class KeyResult:
    channel: int
    name: str
    figures: KeyFigures
    verdict: str
    outcome: Suggestion | Refusal
    before: ChannelSettings
    after: ChannelSettings
    trace: KeyTouches
    touched_noise: TouchedNoise | None = None

    @property
    def changed(self) -> bool:
        return self.before != self.after

    @property
    def measured(self) -> bool:
        """True when this recording gave the key a suggestion (its settings come from its own figures)."""
        return isinstance(self.outcome, Suggestion)


@dataclass(frozen=True)
class TunePasses:
    """What a result was measured from, for whatever goes through the frames again (limits, the report's
    plots): the frames, every key's baseline (its `passes()` give the deltas) and the touches found. Valid
    while the frames are (a spool is closed with its `with`)."""

    source: FrameSource
    baselines: Baselines
    touches: Touches


@dataclass
class TuneResult:
    profile: Profile
    keys: list[KeyResult]
    rate_hz: float
    from_marks: bool
    source: str
    frames: int
    couplings: list[Coupling]
    passes: TunePasses

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


def base_profile(rec: Frames, base: Profile | None) -> Profile:
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


def first_pass(source: FrameSource, rate_hz: float, learn: bool) -> tuple[RowStore, int, dict[int, int]]:
    """One pass: every key's raw half-second window medians (the baselines' points) and, when `learn`,
    each channel's direction from its first clear touch that comes back, as the live session learns it
    (ALGORITHM.md, first contact; channels never touched are left out)."""
    w = window_frames(rate_hz)
    medians = WindowMedians(w, source.rows(source.width))
    width = source.width
    startup = Startup(width, [False] * width, [True] * width, rate_hz) if learn else None
    learned: dict[int, int] = {}
    for piece in source.pieces():
        medians.feed(piece.readings)
        if startup is not None:
            for step in startup.advance(piece.readings, piece.t_s):
                if isinstance(step, Learned):
                    learned[step.channel] = step.sign
    return medians.finish(), w, learned


def _source_of(rec: Recording | SourceFrames, piece_frames: int) -> FrameSource:
    if isinstance(rec, Recording):
        t_s, _, readings = rec.arrays()
        return ArraySource(t_s, readings, piece_frames)
    return rec


def tune_recording(rec: Recording | SourceFrames, base: Profile | None = None,
                   bounds: VerdictBounds | None = None, *, rate_hz: float | None = None,
                   piece_frames: int = PIECE_FRAMES, **select_kw: int) -> TuneResult:
    """Every key of `rec` measured and tuned: a `Recording` in memory (gone through in pieces of
    `piece_frames`), or frames in passes that also answer what `Frames` asks (`SourceFrames`:
    `processing.frame_spool.FrameSpool`, what `padtune tune` reads a file into). `select_kw` sets the
    exact selections' memory (`processing.order_stats.select`). `rate_hz`: the board's frame rate when the
    user gives it, else the recording's (`Frames.rate_hz`: its info line's, else measured), else 100 Hz."""
    source = _source_of(rec, piece_frames)
    meta: Frames = rec
    if source.frames < MIN_FRAMES:
        got = f"{source.frames} frame{'' if source.frames == 1 else 's'}"
        raise UserError(f"{meta.path}: only {got}; record at least a few seconds with each key touched")
    rate_hz = rate_hz or meta.rate_hz or 100.0
    profile = base_profile(meta, base)
    info = meta.info
    polarity = tuple(info.polarity) if info and info.polarity else tuple(profile.polarity)
    medians, window, learned = first_pass(source, rate_hz, learn=not polarity)
    if not polarity:  # nobody says: each key's first touch that comes back (ALGORITHM.md, first contact)
        polarity = tuple(learned.get(c, 1) for c in range(profile.channels))  # +1 for a key never touched
        if len(learned) == profile.channels:  # a profile lists all or none
            profile = replace(profile, polarity=polarity)
    b = baselines_from(source, expand_polarity(polarity, source.width), medians, window)
    touches = find_touches_streaming(b, profile.names, rate_hz, meta.marks, **select_kw)
    keys, profile = _key_results(b, touches, profile, base, rate_hz, bounds or VerdictBounds(), select_kw)
    profile = replace(profile, rate_hz=rate_hz)
    thresholds = {c: float(k.after.threshold_counts) for c, k in enumerate(keys)}
    found = couplings_streaming(b.passes, touches.stretches, source.frames, touches.quiet, thresholds,
                                profile.sliders, **select_kw)
    return TuneResult(profile, keys, rate_hz, touches.from_marks, meta.path, source.frames, found,
                      TunePasses(source, b, touches))


def _key_results(b: Baselines, touches: Touches, profile: Profile, base: Profile | None, rate_hz: float,
                 bounds: VerdictBounds, select_kw: dict[str, int]) -> tuple[list[KeyResult], Profile]:
    """Each key's figures, verdict and suggestion (or refusal), and the profile with them applied."""
    keyed = KeySamples(b, touches.quiet, touches.touched)
    samples = keyed.samples(**select_kw)
    planned: list[Levels | Refusal] = [
        Refusal("no touch found on this key: record it being touched (or mark the touches)")
        if not touches.stretches[c] else levels(quiet, held) for c, (quiet, held) in enumerate(samples)]
    runs = keyed.runs([lv if isinstance(lv, Levels) else None for lv in planned])
    noise_held = touched_noise_by_key(b.passes, touches.stretches, rate_hz)
    quiet_frames = frame_ranges.count(touches.quiet)
    keys = []
    for c, ((quiet, held), lv) in enumerate(zip(samples, planned, strict=True)):
        figures = figures_from(quiet, held)
        outcome = debounced(lv, *runs[c], rate_hz) if isinstance(lv, Levels) else lv
        before = profile.settings_for(c)
        after = outcome.apply(before) if isinstance(outcome, Suggestion) else before
        trace = KeyTouches(touches.stretches[c], touched_frames=frame_ranges.count(touches.touched[c]),
                           quiet_frames=quiet_frames, from_marks=touches.from_marks)
        keys.append(KeyResult(c, profile.names[c], figures, bounds.verdict(figures.snr_pp), outcome, before,
                              after, trace, noise_held[c]))
        # Unmeasured: settings from defaults, not from this key (the rule: `measured_marks`).
        ok = isinstance(outcome, Suggestion)
        marks = measured_marks(base, [c] if ok else [], [] if ok else [c])
        profile = profile.with_settings(c, after).with_measured(c, marks[c])
    return keys, profile


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


def channel_limits(key: KeyResult, extremes: tuple[int, int] | None, baseline_margin: float) -> Limits:
    """One channel's own baseline range and noise limits from a good unit (see the margins above):
    `extremes` is its lowest and highest reading outside its own touches (None: it has no such frame)."""
    pp, rms = key.figures.noise_pp_counts, key.figures.noise_rms_counts
    lo = hi = None
    if extremes is not None:
        lo = math.floor(float(extremes[0]) * (1 - baseline_margin))
        hi = max(math.ceil(float(extremes[1]) * (1 + baseline_margin)), lo + 1)
    return Limits(
        max_noise_pp_counts=float(math.ceil(NOISE_LIMIT_FACTOR * max(pp, MIN_NOISE_PP_COUNTS)))
        if pp is not None else None,
        max_noise_rms_counts=round(NOISE_LIMIT_FACTOR * max(rms, MIN_NOISE_RMS_COUNTS), 1)
        if rms is not None else None,
        baseline_min_counts=lo, baseline_max_counts=hi)


def limits_from_result(result: TuneResult, baseline_margin: float = 0.2) -> tuple[Limits, dict[int, Limits]]:
    """Acceptance limits for `padtune check` from a recording of a good unit: `[limits]` (the SNR floor,
    and the whole unit's band and noise for any channel without its own) and each channel's own.

    Each channel gets its own baseline range (its lowest and highest untouched reading widened by
    `baseline_margin`) and noise limits, so a pad that drifts to another pad's count fails. The
    margins and where they come from are above (`NOISE_LIMIT_FACTOR`, ...). One more pass over the
    frames the result was measured from (for each channel's readings outside its own touches).
    """
    extremes = untouched_extremes(result.passes.source, [k.trace.stretches for k in result.keys])
    own = {c: channel_limits(k, extremes[c], baseline_margin) for c, k in enumerate(result.keys)}
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
