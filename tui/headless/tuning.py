"""What `padtune tune` shows of a `processing.tuning.TuneResult`: one plain row per key for its table, its
JSON and its HTML report (the tuning itself is `processing.tuning`), and the crosstalk table (touching key
A moves key B: `crosstalk_rows`), both measured with the result (`processing.tuning`)."""

from __future__ import annotations

from typing import TypedDict

from processing.crosstalk import FLAG_SHARE, worst_by_target
from processing.measure import rests_on
from processing.suggest import Refusal, Suggestion
from processing.tuning import TuneResult


class KeyRow(TypedDict):
    """One key of a tuning result as the table, the JSON (`padtune tune --json`) and the report show it."""

    name: str
    index: int
    touches: int
    noise_pp: float | None
    noise_rms: float | None
    noise_touched_pp: float | None  # noise while touched, the touch level removed (processing.crosstalk)
    noise_touched_rms: float | None
    touched_tone: str  # the touched noise's spectrum in a few words (the mains alias check), "" if none
    signal: float | None
    snr_pp: float | None
    snr_rms: float | None
    verdict: str
    basis: str  # what the verdict rests on: touches, touched frames, noise frames
    crosstalk_pct: float | None  # the largest crosstalk onto this key, % of its threshold
    crosstalk_from: str | None  # ... from touching this key
    crosstalk_flagged: bool  # above FLAG_SHARE of its threshold
    threshold: int | None
    hysteresis: int | None
    touch_debounce: int | None
    release_debounce: int | None
    suggested: bool
    measured: bool  # False: the key keeps settings it was not measured for (marked in the profile)
    reasons: dict[str, str]  # setting -> why it was suggested
    refusal: str | None  # why nothing was suggested


class CrosstalkRow(TypedDict):
    """Touching `source` moves `target` by `shift` counts: `share_pct` % of the target's threshold."""

    pair: str  # "source > target"
    source: str
    target: str
    shift: float
    share_pct: float | None
    frames: int
    flagged: bool  # above FLAG_SHARE of its threshold, and not slider neighbours
    slider: str | None  # the slider both are pads of (slider neighbours: shown, never flagged)


def crosstalk_rows(result: TuneResult) -> list[CrosstalkRow]:
    """The crosstalk table, the largest share first (only pairs measured: one key alone touched)."""
    names = [k.name for k in result.keys]
    return [{"pair": f"{names[c.source]} > {names[c.target]}", "source": names[c.source],
             "target": names[c.target], "shift": round(c.shift_counts, 1),
             "share_pct": None if c.share is None else round(100 * c.share, 1), "frames": c.frames,
             "flagged": c.flagged(), "slider": c.slider}
            for c in result.couplings]


CROSSTALK_RULE = (f"crosstalk: touching one key alone moves another by its median delta then, less its own "
                  f"untouched median; flagged above {100 * FLAG_SHARE:.0f}% of its threshold "
                  "(common practice, no source); pads of one slider moving together are slider neighbours "
                  "(the slider working), shown but not flagged")


def result_rows(result: TuneResult) -> list[KeyRow]:
    """One plain dict per key: what the table, the JSON and the report show."""
    rows: list[KeyRow] = []
    worst = worst_by_target(result.couplings)
    for k in result.keys:
        f, s = k.figures, k.after
        ok = isinstance(k.outcome, Suggestion)
        held = k.touched_noise
        x = worst.get(k.channel)
        share = x.share if x is not None else None
        rows.append({
            "name": k.name, "index": k.channel, "touches": len(k.trace.stretches),
            "noise_pp": f.noise_pp_counts, "noise_rms": f.noise_rms_counts,
            "noise_touched_pp": round(held.pp_counts, 1) if held else None,
            "noise_touched_rms": round(held.rms_counts, 2) if held else None,
            "touched_tone": held.hum() if held else "",
            "signal": f.signal_counts,
            "snr_pp": f.snr_pp, "snr_rms": f.snr_rms, "verdict": k.verdict,
            "basis": rests_on(len(k.trace.stretches), k.trace.touched_frames, k.trace.quiet_frames),
            "crosstalk_pct": None if share is None else round(100 * share, 1),
            "crosstalk_from": result.keys[x.source].name if x is not None else None,
            "crosstalk_flagged": bool(x is not None and x.flagged()),
            "threshold": s.threshold_counts if ok else None,
            "hysteresis": s.hysteresis_counts if ok else None,
            "touch_debounce": s.touch_debounce_frames if ok else None,
            "release_debounce": s.release_debounce_frames if ok else None,
            "suggested": ok,
            "measured": k.measured,
            "reasons": dict(k.outcome.reasons) if isinstance(k.outcome, Suggestion) else {},
            "refusal": k.outcome.reason if isinstance(k.outcome, Refusal) else None,
        })
    return rows
