"""One recording through two profiles: the pure core of `padtune replay FILE --profile A --against B`.

Each side's detections (`processing.detections`) are turned into touches with their span of frames
(`Side`). Two touches of the same key, one under each profile, are the same touch when their spans
overlap; a touch of B that overlaps no touch of A is *gained*, a touch of A that overlaps none of B is
*lost* (`match_touches`: one to one, in time order, so B's two short touches inside A's one long touch
are one kept and one gained). `first_difference` finds the first frame where the two sides said
different things (a touch, a release, a group's or a slider's change) and what each said.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

from processing.detections import GroupChange, Release, SliderChange, StuckRelease, Touch

NOTHING = "nothing"


@dataclass(frozen=True)
class Span:
    """A touch as one profile saw it: touched from frame `start` until frame `end` (the release, or None
    when the recording ended with the key touched)."""

    channel: int
    start: int
    t_s: float
    end: int | None = None
    expected: bool | None = None  # against the recording's touch marks; None without marks


@dataclass(frozen=True)
class Said:
    """What one side said at one frame about one key (or group, or slider)."""

    index: int
    t_s: float
    key: str
    what: str  # "touch", "release", "stuck release", "reports zone2", "at 41", "released"
    detail: str = ""  # "delta 412": shown, not compared (a baseline setting moves the delta a little)


@dataclass
class Side:
    """Collects one profile's touches (with their spans) from its detections, batch by batch."""

    names: Sequence[str]
    spans: list[Span] = field(default_factory=list)
    _open: dict[int, int] = field(default_factory=dict)  # channel -> position in spans of its open touch

    def name(self, channel: int | None) -> str:
        if channel is None:
            return "none"
        return self.names[channel] if channel < len(self.names) else f"ch{channel}"

    def feed(self, detections: Iterable[Any], expected: Sequence[bool | None] = ()) -> list[Said]:
        """Take a batch's detections; `expected[i]` judges the batch's i-th touch. Returns what was said."""
        judged = iter(expected)
        said: list[Said] = []
        for det in detections:
            if isinstance(det, Touch):
                self._open[det.channel] = len(self.spans)
                self.spans.append(Span(det.channel, det.index, det.t_s, None, next(judged, None)))
                said.append(Said(det.index, det.t_s, self.name(det.channel), "touch",
                                 f"delta {det.delta_counts}"))
            elif isinstance(det, Release | StuckRelease):
                at = self._open.pop(det.channel, None)
                if at is not None:
                    s = self.spans[at]
                    self.spans[at] = Span(s.channel, s.start, s.t_s, det.index, s.expected)
                word = "stuck release" if isinstance(det, StuckRelease) else "release"
                held = f"held {det.held_s:.2f} s"
                said.append(Said(det.index, det.t_s, self.name(det.channel), word, held))
            elif isinstance(det, GroupChange):
                who = f"reports {self.name(det.channel)}"
                said.append(Said(det.index, det.t_s, f"group {det.group}", who))
            elif isinstance(det, SliderChange):
                where = f"at {det.position}" if det.touched and det.position is not None else "released"
                said.append(Said(det.index, det.t_s, f"slider {det.slider}", where))
        return said


def _overlap(a: Span, b: Span) -> bool:
    a_end = math.inf if a.end is None else a.end
    b_end = math.inf if b.end is None else b.end
    return a.start < b_end and b.start < a_end


def match_touches(a: Sequence[Span], b: Sequence[Span]) -> tuple[list[Span], list[Span]]:
    """(gained: B's touches that no touch of A overlaps, lost: A's touches that no touch of B overlaps).

    Per key, in time order, one to one: a touch's frames are [start, end) (released at `end`). A key's
    touches under one profile never overlap each other, so walking both lists once is enough."""
    gained: list[Span] = []
    lost: list[Span] = []
    for channel in sorted({s.channel for s in (*a, *b)}):
        xs = sorted((s for s in a if s.channel == channel), key=lambda s: s.start)
        ys = sorted((s for s in b if s.channel == channel), key=lambda s: s.start)
        i = j = 0
        while i < len(xs) and j < len(ys):
            if _overlap(xs[i], ys[j]):
                i, j = i + 1, j + 1
            elif xs[i].start < ys[j].start:
                lost.append(xs[i])
                i += 1
            else:
                gained.append(ys[j])
                j += 1
        lost.extend(xs[i:])
        gained.extend(ys[j:])
    return gained, lost


@dataclass(frozen=True)
class Divergence:
    """The first frame where the sides said different things about `key`."""

    index: int
    t_s: float
    key: str
    a: str  # what A said ("touch (delta 412)"), or "nothing"
    b: str


def _words(said: Said | None) -> str:
    if said is None:
        return NOTHING
    return f"{said.what} ({said.detail})" if said.detail else said.what


def first_difference(a: Sequence[Said], b: Sequence[Said]) -> Divergence | None:
    """The earliest frame (then the first key by name) where A and B said different things, or None.

    Give it everything both sides said over the same frames (a whole batch each)."""
    heard: dict[tuple[int, str], list[Said | None]] = {}
    for side, said in enumerate((a, b)):
        for s in said:
            heard.setdefault((s.index, s.key), [None, None])[side] = s
    for (index, key), (sa, sb) in sorted(heard.items()):
        if (sa.what if sa else NOTHING) != (sb.what if sb else NOTHING):
            t = sa.t_s if sa is not None else sb.t_s if sb is not None else 0.0
            return Divergence(index, t, key, _words(sa), _words(sb))
    return None


@dataclass(frozen=True)
class KeyComparison:
    name: str
    touches_a: int
    touches_b: int
    gained: int
    lost: int
    false_a: int | None  # touches outside the recording's touch marks; None without touch marks
    false_b: int | None


def per_key(names: Sequence[str], a: Sequence[Span], b: Sequence[Span], judged: bool) -> list[KeyComparison]:
    """A row per channel: touches under each profile, gained and lost, false touches under each."""
    gained, lost = match_touches(a, b)
    rows = []
    for channel, name in enumerate(names):
        mine_a = [s for s in a if s.channel == channel]
        mine_b = [s for s in b if s.channel == channel]
        rows.append(KeyComparison(
            name, len(mine_a), len(mine_b), sum(s.channel == channel for s in gained),
            sum(s.channel == channel for s in lost),
            sum(s.expected is False for s in mine_a) if judged else None,
            sum(s.expected is False for s in mine_b) if judged else None))
    return rows
