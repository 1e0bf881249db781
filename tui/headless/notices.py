"""Collapsing repeated notices: at most one line per second per kind, the repeats counted (pure).

A board that resets on every line, or a link that reports the same trouble a thousand times a
second, must not flood stderr or the log. `NoticeGate.add(text, now_s)` returns the lines to show
now: the first notice of a kind at once, repeats within `interval_s` of the last line shown held and
counted, then one summary line for them once the interval has passed:
`board reset: baselines taken again (x1234 in 1.0 s)`. The kind is the text itself unless given (so
differing details of one kind, such as silences of 2, 4 and 8 s, share a gate; the summary then
carries the latest text). `due(now_s)` gives the summaries whose time has come without a new notice
(call it from a timer); `flush(now_s)` gives every held summary at the end of a run, so no count is
lost. A summary's time is the span since the kind's last line shown.
Times are whatever clock the caller uses (wall time live, recorded time in a replay).
"""

from __future__ import annotations

from dataclasses import dataclass

INTERVAL_S = 1.0


@dataclass
class _Kind:
    shown_s: float  # when the last line of this kind was shown
    held: int = 0  # repeats since then, not shown yet
    text: str = ""  # the latest of them
    last_s: float = 0.0  # when the latest of them came


class NoticeGate:
    def __init__(self, interval_s: float = INTERVAL_S) -> None:
        self.interval_s = interval_s
        self._kinds: dict[str, _Kind] = {}
        self.suppressed = 0  # repeats that were folded into a summary line (all kinds, ever)

    def add(self, text: str, now_s: float, kind: str | None = None) -> list[str]:
        """Lines to show now for this notice (and any summary that has come due)."""
        key = text if kind is None else kind
        state = self._kinds.get(key)
        out = self.due(now_s)
        if state is None or (state.held == 0 and now_s - state.shown_s >= self.interval_s):
            self._kinds[key] = _Kind(shown_s=now_s)
            out.append(text)
            return out
        state.held += 1
        state.text, state.last_s = text, now_s
        self.suppressed += 1
        return out + self._summaries(now_s, only=key)

    def due(self, now_s: float) -> list[str]:
        """Summary lines for every kind whose interval has passed since its last line."""
        return self._summaries(now_s)

    def flush(self, now_s: float | None = None) -> list[str]:
        """Every held summary now (the run is ending at `now_s`, or at its latest notice)."""
        return self._summaries(now_s, force=True)

    def _summaries(self, now_s: float | None, only: str | None = None, force: bool = False) -> list[str]:
        out = []
        for key, state in self._kinds.items():
            if state.held == 0 or (only is not None and key != only):
                continue
            end_s = max(state.last_s, state.last_s if now_s is None else now_s)
            if not force and end_s - state.shown_s < self.interval_s:
                continue
            out.append(f"{state.text} (x{state.held} in {end_s - state.shown_s:.1f} s)")
            state.shown_s, state.held = end_s, 0
        return out
