"""Each channel's lowest and highest raw reading outside its own touches, in one pass over the frames.

`processing.tuning.channel_limits` widens these into a good unit's baseline range. Here they come from a
`FrameSource` a piece at a time (any recording, bounded memory): a channel's touches become the ranges of
frames it was not touched (`frame_ranges.complement`), and each piece gives the min and max of the
readings inside them. Readings are integers and stay so: the extremes are exact.
Pure numpy, no I/O.
"""

from __future__ import annotations

from collections.abc import Sequence

from processing.frame_ranges import complement, normalised, take
from processing.frame_source import FrameSource


def untouched_extremes(source: FrameSource, stretches: Sequence[Sequence[tuple[int, int]]]
                       ) -> list[tuple[int, int] | None]:
    """Per channel, (lowest, highest) reading in the frames outside its [start, stop) touches (a touch's
    stop past the end is clipped), None when it has none. One list
    of touches per channel of the source; a touch must not start before frame 0."""
    if len(stretches) != source.width:
        raise ValueError(f"one list of touches per channel: {len(stretches)} lists for {source.width} "
                         "channels")
    for c, runs in enumerate(stretches):
        if any(a < 0 for a, _ in runs):
            raise ValueError(f"channel {c}: a touch starts before frame 0")
    free = [complement(normalised(runs, source.frames), source.frames) for runs in stretches]
    found: list[tuple[int, int] | None] = [None] * source.width
    for piece in source.pieces():
        for c, ranges in enumerate(free):
            values = take(piece.readings[:, c], piece.start, ranges)
            if not len(values):
                continue
            lo, hi = int(values.min()), int(values.max())
            seen = found[c]
            found[c] = (lo, hi) if seen is None else (min(seen[0], lo), max(seen[1], hi))
    return found
