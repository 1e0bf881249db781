"""Crosstalk measured a pass at a time, without a frames-long array (the rule of `processing.crosstalk`).

The same couplings, float for float and in the same order, from passes over every key's delta
(`processing.frame_source.DeltaPasses`) instead of whole traces: each target's zero (the median of its
deltas in the quiet frames) and each (source, target) shift (the median of the target's deltas in the
frames where the source alone was touched, less the zero) are exact medians found by
`processing.order_stats`, all queries together in as few passes as its memory budget allows. The quiet
frames and the frames where a key was touched alone are short lists of ranges
(`processing.frame_ranges`), never masks. Pure numpy, no I/O.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from processing.crosstalk import MIN_FRAMES, Coupling, largest_first, slider_of
from processing.frame_ranges import Ranges, alone, count, normalised, take
from processing.frame_source import DeltaPasses
from processing.order_stats import medians
from processing.slider import SliderSpec


@dataclass(frozen=True, slots=True)
class _Query:
    """One median wanted: key `column`'s deltas in the frames of `frames` (a list of ranges)."""

    frames: int  # index into the shared list of frame ranges
    column: int


def _passes_over(deltas: DeltaPasses, ranges: Sequence[Ranges], queries: Sequence[_Query], width: int):
    """`order_stats.Passes` over `queries`: each pass one pass of `deltas`, each piece the active queries'
    deltas within their frames (only ranges some active query needs are cut out)."""

    def passes(active: Sequence[int]) -> Iterator[Mapping[int, np.ndarray]]:
        by_ranges: dict[int, list[int]] = {}
        for q in active:
            by_ranges.setdefault(queries[q].frames, []).append(q)
        for start, block in deltas():
            if block.ndim != 2 or block.shape[1] != width:
                raise ValueError(f"a delta piece must be frames x {width} keys, not {block.shape}")
            piece: dict[int, np.ndarray] = {}
            for r, qs in by_ranges.items():
                rows = take(block, start, ranges[r])
                if len(rows):
                    piece.update({q: rows[:, queries[q].column] for q in qs})
            yield piece

    return passes


def couplings_streaming(deltas: DeltaPasses, stretches: Sequence[Sequence[tuple[int, int]]], frames: int,
                        quiet: Sequence[tuple[int, int]], thresholds: Mapping[int, float | None],
                        sliders: Iterable[SliderSpec] = (), **select_kw: int) -> list[Coupling]:
    """`processing.crosstalk.couplings` of every key's deltas in the quiet frames and in the frames where
    one other key alone was touched (those with at least `MIN_FRAMES`), `deltas` giving every frame
    (frames x keys, one key per stretch list); the same couplings, floats and order as the whole-array
    `couplings_by_key` of tests/processing/tune_reference.py. `select_kw`
    goes to `processing.order_stats.select` (`budget_values`, `bins`)."""
    width = len(stretches)
    by_source = alone(stretches, frames)
    sources = sorted(s for s, r in by_source.items() if count(r) >= MIN_FRAMES)  # sources in key order
    pairs = [(s, t) for s in sources for t in range(width) if t != s]
    if not pairs:
        return []
    quiet = normalised(quiet, frames)
    targets = sorted({t for _, t in pairs})
    ranges: list[Ranges] = [quiet] + [by_source[s] for s in sources]
    at_source = {s: i + 1 for i, s in enumerate(sources)}
    zeroed = count(quiet) >= MIN_FRAMES  # else every zero is 0.0, as `untouched_zero`
    queries = [_Query(0, t) for t in targets] if zeroed else []
    first_pair = len(queries)
    queries += [_Query(at_source[s], t) for s, t in pairs]
    counts = [count(ranges[q.frames]) for q in queries]
    found = medians(_passes_over(deltas, ranges, queries, width), counts, **select_kw)
    zero = dict.fromkeys(targets, 0.0)
    if zeroed:
        zero.update({t: float(m) for t, m in zip(targets, found[:first_pair], strict=True)})
    neighbours = slider_of(sliders)
    out = [Coupling(s, t, float(m) - zero[t], n, thresholds.get(t), neighbours.get((s, t)))
           for (s, t), m, n in zip(pairs, found[first_pair:], counts[first_pair:], strict=True)]
    return sorted(out, key=largest_first)
