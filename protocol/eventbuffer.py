"""The bounded, thread-safe hand-over between the link's reader thread and its consumer.

A slow consumer never grows memory, and nothing leaves without being counted:
- past `max_frames` queued frames the newest frames are dropped and one `LinkFault(OVERFLOW)` marker
  (its count growing) stands where they would have been;
- past `max_events` other events, link faults are merged: the first fault of each kind that finds the
  queue full stands for every later one of its kind (its `count` growing), so a flood of garbage keeps
  every garbled line in a count and a rarer fault (a wrong baud rate) still gets through. That costs at
  most one extra slot per `FaultKind`;
- notes, answers and info lines past `max_events` are dropped behind one `LinkFault(DROPPED)` marker
  that counts them;
- connection status events are always kept (there are only ever a few).
"""

from __future__ import annotations

import threading
from collections import deque
from collections.abc import Callable
from dataclasses import dataclass

from protocol.events import Event, FaultKind, FrameBlock, LinkFault, LinkStatus

_BEHIND = "the consumer fell behind"


@dataclass(slots=True)
class _Tally:
    """A queued fault still taking in the counts of later faults of its kind (mutable until drained)."""

    t_s: float
    kind: FaultKind
    count: int
    detail: str
    merged: int = 0  # faults merged into it after the first

    def fault(self) -> LinkFault:
        if self.kind is FaultKind.DROPPED:
            events = f"{self.count} event{'' if self.count == 1 else 's'}"
            return LinkFault(self.t_s, self.kind, self.count,
                             f"{events} (notes, answers or info lines) dropped: {_BEHIND}")
        if not self.merged:
            return LinkFault(self.t_s, self.kind, self.count, self.detail)
        more = f"{self.merged} more {self.kind.value} report{'' if self.merged == 1 else 's'} merged here"
        detail = f"{self.detail} ({more}: {_BEHIND})" if self.detail else f"{more}: {_BEHIND}"
        return LinkFault(self.t_s, self.kind, self.count, detail)


class EventBuffer:
    def __init__(self, max_frames: int = 20_000, max_events: int = 10_000) -> None:
        if max_frames < 1 or max_events < 1:
            raise ValueError("the event buffer needs room for at least one frame and one event")
        self.max_frames = max_frames
        self.max_events = max_events
        self._items: deque[Event | _Tally] = deque()
        self._tallies: dict[FaultKind, _Tally] = {}  # the queued tally of each kind, until drained
        self._frames = 0
        self._others = 0
        self._lock = threading.Lock()
        self.dropped_frames = 0
        self.dropped_events = 0  # notes, answers and info lines dropped (faults are merged, not lost)
        self.merged_faults = 0  # fault reports merged into an earlier one of their kind (counts kept)

    def __len__(self) -> int:
        with self._lock:
            return len(self._items)

    @property
    def queued_frames(self) -> int:
        return self._frames

    def put(self, events: list[Event], on_drop: Callable[[int, int], None] | None = None) -> None:
        """Queue events in order; `on_drop(frames, events)` is told what had to be dropped."""
        lost_frames = lost_events = 0
        with self._lock:
            for ev in events:
                if isinstance(ev, FrameBlock):
                    lost_frames += self._put_frames(ev)
                elif isinstance(ev, LinkStatus) or self._others < self.max_events:
                    self._items.append(ev)
                    self._others += 1
                elif isinstance(ev, LinkFault):
                    self._merge(ev.t_s, ev.kind, ev.count, ev.detail)
                else:
                    lost_events += 1
                    self._merge(ev.t_s, FaultKind.DROPPED, 1, "")
            self.dropped_frames += lost_frames
            self.dropped_events += lost_events
        if on_drop is not None and (lost_frames or lost_events):
            on_drop(lost_frames, lost_events)

    def _merge(self, t_s: float, kind: FaultKind, count: int, detail: str) -> None:
        """Add a fault to the queued tally of its kind, or queue a new tally (one slot per kind)."""
        tally = self._tallies.get(kind)
        if tally is None:
            tally = _Tally(t_s, kind, count, detail)
            self._tallies[kind] = tally
            self._items.append(tally)
            self._others += 1
            return
        tally.count += count
        tally.merged += 1
        if kind is not FaultKind.DROPPED:
            self.merged_faults += 1

    def _put_frames(self, block: FrameBlock) -> int:
        room = self.max_frames - self._frames
        n = len(block)
        if n <= room:
            self._items.append(block)
            self._frames += n
            return 0
        if room > 0:
            times = None if block.board_time is None else block.board_time[:room]
            states = None if block.board_states is None else block.board_states[:room]
            self._items.append(FrameBlock(block.t_s[:room], block.seq[:room], block.readings[:room],
                                          block.first_index, times, states))
            self._frames += room
        dropped = n - max(room, 0)
        last = self._items[-1] if self._items else None
        if isinstance(last, LinkFault) and last.kind is FaultKind.OVERFLOW:
            self._items[-1] = LinkFault(last.t_s, FaultKind.OVERFLOW, last.count + dropped, last.detail)
        else:
            detail = f"{_BEHIND}; newest frames dropped"
            self._items.append(LinkFault(float(block.t_s[0]), FaultKind.OVERFLOW, dropped, detail))
            self._others += 1
        return dropped

    def drain(self, max_events: int | None = None) -> list[Event]:
        out: list[Event] = []
        with self._lock:
            items = self._items
            while items and (max_events is None or len(out) < max_events):
                ev = items.popleft()
                if isinstance(ev, FrameBlock):
                    self._frames -= len(ev)
                else:
                    self._others -= 1
                if isinstance(ev, _Tally):
                    del self._tallies[ev.kind]
                    ev = ev.fault()
                out.append(ev)
        return out
