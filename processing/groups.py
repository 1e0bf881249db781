"""Exclusive groups: of several member keys touched at once, only the strongest is reported.

The rule, evaluated every frame (ALGORITHM.md, "Exclusive groups"):
1. Candidates are the members reported touched (state touched or releasing).
2. No candidate: nobody is reported.
3. The current winner keeps its place while it is a candidate, unless another candidate's delta is
   more than `switch_margin_counts` above the winner's delta (with the default margin 0: strictly
   larger). A tie therefore never takes the place from the current winner.
4. Otherwise (no winner yet, it released, or it was beaten) the candidate with the largest delta
   wins; among equal deltas the member listed first in the group wins.
A `GroupChange` event is emitted whenever the reported member changes (including to nobody).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from processing.detections import GroupChange, KeyState


@dataclass(frozen=True, slots=True)
class GroupSpec:
    name: str
    members: tuple[int, ...]  # channel indices, in priority order for ties
    switch_margin_counts: int = 0


def pick_winner(current: int | None, candidates: Sequence[int], deltas: Sequence[int],
                margin: int) -> int | None:
    """One frame of the rule above. `candidates` are member channels in group order; deltas by channel."""
    if not candidates:
        return None
    best = candidates[0]
    for c in candidates[1:]:
        if deltas[c] > deltas[best]:
            best = c
    if current in candidates and deltas[best] <= deltas[current] + margin:
        return current
    return best


class ExclusiveGroup:
    """Tracks the reported member of one group across frames."""

    def __init__(self, spec: GroupSpec) -> None:
        self.spec = spec
        self.winner: int | None = None

    def update(self, first_index: int, t_s: np.ndarray, deltas: np.ndarray,
               states: np.ndarray) -> list[GroupChange]:
        members = list(self.spec.members)
        held = (states[:, members] == KeyState.TOUCHED) | (states[:, members] == KeyState.RELEASING)
        events: list[GroupChange] = []
        if self.winner is None and not held.any():
            return events
        for i in range(len(t_s)):
            candidates = [m for m, h in zip(members, held[i].tolist(), strict=True) if h]
            winner = pick_winner(self.winner, candidates, deltas[i], self.spec.switch_margin_counts)
            if winner != self.winner:
                self.winner = winner
                events.append(GroupChange(self.spec.name, first_index + i, float(t_s[i]), winner))
        return events

    def reset(self) -> None:
        self.winner = None
