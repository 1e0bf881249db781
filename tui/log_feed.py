"""What a poll of the live source brought, as the event log's lines; pure, no Textual.

Link faults and the session's notices pass a `NoticeGate` (one line a second per kind, with a count),
a new session's re-baseline of every channel is one line, slider moves are not logged. Each channel
also keeps its last few lines for the detail panel. Times are seconds since the screen opened.
"""

from __future__ import annotations

from collections import deque
from collections.abc import Callable, Sequence

from rich.text import Text

from processing.detections import DetectionEvent, Rebaselined, SliderChange
from protocol.events import Event, LinkFault
from tui.describe import describe_detection, describe_event
from tui.headless.notices import NoticeGate

RECENT_LINES = 8  # per channel, for the detail panel's "recent events"

LogLine = tuple[float, Text]


class LogFeed:
    def __init__(self, clock: Callable[[], float]) -> None:
        self.clock = clock
        self.t0_s = clock()
        self.recent: dict[int, deque[str]] = {}
        self._gate = NoticeGate()

    def since_start(self, t_s: float) -> float:
        return max(0.0, t_s - self.t0_s)

    def now(self, text: str) -> LogLine:
        """A line of our own (an edit, a save), stamped now."""
        return self.since_start(self.clock()), Text(text)

    def lines(self, events: Sequence[Event], detections: Sequence[DetectionEvent], names: Sequence[str],
              notices: deque[str] | None = None) -> list[LogLine]:
        """The log's lines for one poll: its link events, detections and the session's new notices
        (taken from `notices`), then what the gate held back and may say now."""
        now = self.clock()
        out: list[LogLine] = []
        for ev in events:
            line = describe_event(ev)
            if line is None:
                continue
            if isinstance(ev, LinkFault):  # a flood of one fault: a few lines, with counts
                out += [(self.since_start(ev.t_s), Text(t))
                        for t in self._gate.add(line.plain, now, kind=f"link {ev.kind.value}")]
            else:
                out.append((self.since_start(ev.t_s), line))
        rebased = [d for d in detections if isinstance(d, Rebaselined)]
        if rebased:  # a new session re-baselines every channel at once: one line, not one per channel
            which = sorted({d.channel for d in rebased})
            every = len(which) == len(names) > 1
            what = "all channels" if every else " ".join(_name(names, c) for c in which)
            out += [(self.since_start(rebased[0].t_s), Text(t))
                    for t in self._gate.add(f"~ re-baselined {what}", now)]  # a board resetting every line
        for det in detections:
            line = None if isinstance(det, Rebaselined) else describe_detection(det, names)
            if line is None:
                continue
            t_s = self.since_start(det.t_s)
            out.append((t_s, line))
            channel = None if isinstance(det, SliderChange) else det.channel  # a group's winner, or None
            if channel is not None:
                self.recent.setdefault(channel, deque(maxlen=RECENT_LINES)).append(f"{t_s:7.2f} {line.plain}")
        while notices:
            out += [(self.since_start(now), Text(t)) for t in self._gate.add(f"ⓘ {notices.popleft()}", now)]
        out += [(self.since_start(now), Text(t)) for t in self._gate.due(now)]
        return out


def _name(names: Sequence[str], channel: int) -> str:
    return names[channel] if 0 <= channel < len(names) else f"ch{channel}"
