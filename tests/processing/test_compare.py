"""The pure core of `replay --against`: spans from detections, gained and lost, the first difference."""

from __future__ import annotations

from processing.compare import Said, Side, Span, first_difference, match_touches, per_key
from processing.detections import GroupChange, Release, StuckRelease, Touch


def test_gained_and_lost_against_a_count_worked_by_hand():
    """Worked by hand (frames [start, end), one key):
    A: [10,50) [100,120) [300,310)       B: [15,45) [60,70) [105,130) [200, end of recording)
    [10,50)~[15,45) overlap: kept.  [60,70) overlaps no A touch: gained.  [100,120)~[105,130): kept.
    [200,...) starts after A's [100,120) ended and before [300,310): it overlaps [300,310) (open end),
    so that pair is kept.  Gained 1 ([60,70)), lost 0: A 3 touches, B 4 = 3 + 1 - 0.
    A second key only under A is lost whole; a third only under B is gained whole."""
    a = [Span(0, 10, 0.1, 50), Span(0, 100, 1.0, 120), Span(0, 300, 3.0, 310), Span(1, 5, 0.05, 9)]
    b = [Span(0, 15, 0.15, 45), Span(0, 60, 0.6, 70), Span(0, 105, 1.05, 130), Span(0, 200, 2.0, None),
         Span(2, 400, 4.0, 420)]
    gained, lost = match_touches(a, b)
    assert [(s.channel, s.start) for s in gained] == [(0, 60), (2, 400)]
    assert [(s.channel, s.start) for s in lost] == [(1, 5)]
    rows = per_key(("k0", "k1", "k2"), a, b, judged=False)
    assert [(r.touches_a, r.touches_b, r.gained, r.lost) for r in rows] == [(3, 4, 1, 0), (1, 0, 0, 1),
                                                                          (0, 1, 1, 0)]
    # Matched one to one, each key's pairs m give A = m + lost and B = m + gained.
    assert all(r.touches_b == r.touches_a + r.gained - r.lost for r in rows)


def test_two_short_touches_inside_one_long_one_are_one_kept_and_one_gained():
    a = [Span(0, 10, 0.1, 100)]
    b = [Span(0, 12, 0.12, 30), Span(0, 40, 0.4, 90)]
    gained, lost = match_touches(a, b)
    assert [s.start for s in gained] == [40] and lost == []


def test_spans_from_detections_and_false_touches():
    side = Side(("zone1", "zone2"))
    said = side.feed([Touch(0, 10, 0.1, 80), Touch(1, 12, 0.12, 60), Release(0, 40, 0.4, 0.3, 30, 5),
                      StuckRelease(1, 90, 0.9, 0.78, 78, 50)], [True, False])
    assert side.spans == [Span(0, 10, 0.1, 40, True), Span(1, 12, 0.12, 90, False)]
    assert [s.what for s in said] == ["touch", "touch", "release", "stuck release"]
    rows = per_key(side.names, side.spans, [], judged=True)
    assert [(r.false_a, r.false_b, r.lost) for r in rows] == [(0, 0, 1), (1, 0, 1)]


def test_first_difference_is_the_earliest_frame_and_says_what_each_said():
    a = [Said(10, 0.1, "zone1", "touch", "delta 80"), Said(30, 0.3, "zone2", "touch", "delta 50")]
    b = [Said(10, 0.1, "zone1", "touch", "delta 79"), Said(25, 0.25, "zone2", "touch", "delta 41"),
         Said(30, 0.3, "group g", "reports zone2")]
    d = first_difference(a, b)
    assert (d.index, d.key, d.a, d.b) == (25, "zone2", "nothing", "touch (delta 41)")
    assert first_difference(a[:1], b[:1]) is None  # a delta alone is not a difference


def test_group_changes_are_said_by_the_group():
    side = Side(("zone1", "zone2"))
    said = side.feed([GroupChange("zones", 5, 0.05, 1), GroupChange("zones", 9, 0.09, None)])
    assert [(s.key, s.what) for s in said] == [("group zones", "reports zone2"),
                                               ("group zones", "reports none")]
