"""`replay FILE --profile A --against B`: one pass over a recording through two sessions, side by side.

Each batch of recorded events goes to both sessions (one `DetectionRun` each, printing nothing), and
what each detected goes to `processing.compare`; at the end a table per key (touches under each,
gained, lost, false touches under each), the touches gained and lost, and the first frame where the
two differ. With `--json`: JSON Lines, one `gained` or `lost` object per touch, then a `comparison`.
"""

from __future__ import annotations

import json
import sys
from collections.abc import Callable, Iterable, Mapping, Sequence
from typing import IO, Any

from rich.text import Text

from processing.compare import Divergence, KeyComparison, Said, Side, Span, first_difference, per_key
from processing.profile import Profile
from processing.recording_format import Mark
from processing.session import Session
from protocol.events import Event
from tui.headless.output import channel_table, make_console
from tui.headless.runner import DetectionRun, warn_on_stderr


class SilentOutput:
    """An `Output` that prints nothing: each side's run only counts; the comparison is what is shown."""

    def __getattr__(self, name: str) -> Callable[..., None]:
        return lambda *args, **kwargs: None


class AgainstRun:
    """Two detection runs fed the same events; `feed` compares what they said batch by batch."""

    def __init__(self, profile_a: Profile, profile_b: Profile, marks: Sequence[Mark], polarity: Any = None,
                 engine_factory: Any = None) -> None:
        def run(profile: Profile, label: str) -> DetectionRun:
            session = Session(profile, polarity=polarity, engine_factory=engine_factory)
            return DetectionRun(session, SilentOutput(), origin_t_s=0.0, marks=marks,
                                warn=lambda text: warn_on_stderr(f"(profile {label}) {text}"))

        self.runs = (run(profile_a, "A"), run(profile_b, "B"))
        self.sides = (Side(()), Side(()))
        self.divergence: Divergence | None = None

    def feed(self, events: list[Event], now_t_s: float) -> None:
        said: list[list[Said]] = []
        for run, side in zip(self.runs, self.sides, strict=True):
            before = len(run.touches)
            found = run.feed(events, now_t_s)
            side.names = run.session.names
            said.append(side.feed(found, [t.expected for t in run.touches[before:]]))
        if self.divergence is None:
            self.divergence = first_difference(said[0], said[1])

    def names(self) -> list[str]:
        a, b = self.runs[0].session.names, self.runs[1].session.names
        return [n if c >= len(b) or b[c] == n else f"{n}/{b[c]}" for c, n in enumerate(a)]

    def rows(self) -> list[KeyComparison]:
        return per_key(self.names(), self.sides[0].spans, self.sides[1].spans, self.runs[0].judges_touches)


def _span_dict(kind: str, span: Span, names: Sequence[str]) -> dict[str, Any]:
    name = names[span.channel] if span.channel < len(names) else f"ch{span.channel}"
    return {"type": kind, "t": round(span.t_s, 6), "channel": name, "index": span.start,
            "release_index": span.end}


def comparison_dict(run: AgainstRun, name_a: str, name_b: str, t_s: float) -> dict[str, Any]:
    rows = run.rows()
    judged = run.runs[0].judges_touches
    d = run.divergence
    return {
        "type": "comparison", "t": round(t_s, 6), "profile_a": name_a, "profile_b": name_b,
        "frames": run.runs[0].frames, "judged_by_marks": judged,
        "gained": sum(r.gained for r in rows), "lost": sum(r.lost for r in rows),
        "first_difference": None if d is None else
        {"index": d.index, "t": round(d.t_s, 6), "key": d.key, "a": d.a, "b": d.b},
        "channels": [{"name": r.name, "touches_a": r.touches_a, "touches_b": r.touches_b, "gained": r.gained,
                      "lost": r.lost, **({"false_a": r.false_a, "false_b": r.false_b} if judged else {})}
                     for r in rows],
    }


def changed_spans(run: AgainstRun) -> list[tuple[str, Span]]:
    from processing.compare import match_touches

    gained, lost = match_touches(run.sides[0].spans, run.sides[1].spans)
    return sorted([("gained", s) for s in gained] + [("lost", s) for s in lost], key=lambda p: p[1].start)


def write_json(run: AgainstRun, name_a: str, name_b: str, t_s: float, stream: IO[str] | None = None) -> None:
    stream = stream if stream is not None else sys.stdout
    names = run.names()
    for kind, span in changed_spans(run):
        stream.write(json.dumps(_span_dict(kind, span, names), separators=(",", ":")) + "\n")
    stream.write(json.dumps(comparison_dict(run, name_a, name_b, t_s), separators=(",", ":")) + "\n")
    stream.flush()


_COLUMNS = (("name", "key"), ("touches_a", "touches A"), ("touches_b", "touches B"), ("gained", "gained"),
            ("lost", "lost"))


def write_human(run: AgainstRun, name_a: str, name_b: str, t_s: float, stream: IO[str] | None = None) -> None:
    console = make_console(stream if stream is not None else sys.stdout)
    summary = comparison_dict(run, name_a, name_b, t_s)
    console.print(Text(f"A = {name_a}\nB = {name_b}\n{summary['frames']} frames, {t_s:.1f} s: "
                       f"B gains {summary['gained']} and loses {summary['lost']} of A's touches"))
    columns: list[tuple[str, str]] = list(_COLUMNS)
    if summary["judged_by_marks"]:
        columns += [("false_a", "false A"), ("false_b", "false B")]
    console.print(channel_table(summary["channels"], columns, plain=not console.is_terminal))
    names = run.names()
    for kind, span in changed_spans(run):
        line = _span_dict(kind, span, names)
        console.print(Text(f"{line['t']:9.3f} s  {kind:<6} {line['channel']}  (frame {span.start}; "
                           f"only under {'B' if kind == 'gained' else 'A'})"))
    d: Mapping[str, Any] | None = summary["first_difference"]
    if d is None:
        console.print(Text("A and B detected the same things at the same frames"))
    else:
        console.print(Text(f"first difference at frame {d['index']} ({d['t']:.3f} s), {d['key']}: "
                           f"A {d['a']}, B {d['b']}"))
    console.file.flush()


def feed_all(run: AgainstRun, batches: Iterable[tuple[list[Event], float]],
             stopped: Callable[[], bool]) -> float:
    """Feed every batch (until `stopped()`); returns the last recorded time."""
    last_t = 0.0
    for batch, t_s in batches:
        if stopped():
            break
        last_t = max(last_t, t_s)
        run.feed(batch, last_t)
    for r in run.runs:
        r.finish(last_t)  # held notices flushed; the silent outputs print nothing
    return last_t
