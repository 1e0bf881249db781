"""What `padtune tune` shows of a `processing.tuning.TuneResult`: one plain row per key for its table, its
JSON and its HTML report (the tuning itself is `processing.tuning`)."""

from __future__ import annotations

from typing import TypedDict

from processing.suggest import Refusal, Suggestion
from processing.tuning import TuneResult


class KeyRow(TypedDict):
    """One key of a tuning result as the table, the JSON (`padtune tune --json`) and the report show it."""

    name: str
    index: int
    touches: int
    noise_pp: float | None
    noise_rms: float | None
    signal: float | None
    snr_pp: float | None
    snr_rms: float | None
    verdict: str
    threshold: int | None
    hysteresis: int | None
    touch_debounce: int | None
    release_debounce: int | None
    suggested: bool
    measured: bool  # False: the key keeps settings it was not measured for (marked in the profile)
    reasons: dict[str, str]  # setting -> why it was suggested
    refusal: str | None  # why nothing was suggested


def result_rows(result: TuneResult) -> list[KeyRow]:
    """One plain dict per key: what the table, the JSON and the report show."""
    rows: list[KeyRow] = []
    for k in result.keys:
        f, s = k.figures, k.after
        ok = isinstance(k.outcome, Suggestion)
        rows.append({
            "name": k.name, "index": k.channel, "touches": len(k.trace.stretches),
            "noise_pp": f.noise_pp_counts, "noise_rms": f.noise_rms_counts, "signal": f.signal_counts,
            "snr_pp": f.snr_pp, "snr_rms": f.snr_rms, "verdict": k.verdict,
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
