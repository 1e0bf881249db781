"""Pieces kept by what they were drawn from.

The channel table draws every visible row at every screen frame, and most rows' delta bars
come out as they did a frame ago: a released key's delta wanders over a few counts (a sparkline does
not: its buckets end at the newest frame). A `PiecesMemo` hands the same pieces back for the same inputs.

The styles mapping is held by the memo and compared by identity (mappings are not hashable, and one
mapping is alive for as long as its styles are in use): a new mapping, as after a theme change, draws
afresh. The memo is bounded: past `size` entries it starts over.
"""

from __future__ import annotations

from collections.abc import Hashable

from tui.render import Piece, Styles


class PiecesMemo:
    """Pieces by (inputs, styles); callers must not change the lists they get."""

    def __init__(self, size: int = 4096) -> None:
        self.size = size
        self._kept: dict[Hashable, tuple[Styles, list[Piece]]] = {}

    def get(self, key: Hashable, styles: Styles) -> list[Piece] | None:
        hit = self._kept.get(key)
        return hit[1] if hit is not None and hit[0] is styles else None

    def put(self, key: Hashable, styles: Styles, pieces: list[Piece]) -> list[Piece]:
        if len(self._kept) >= self.size:
            self._kept.clear()
        self._kept[key] = (styles, pieces)
        return pieces
