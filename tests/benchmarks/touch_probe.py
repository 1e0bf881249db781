"""Times touches from the link to the screen, for `bench_app.py` (a helper, not a benchmark itself).

A touch's latency is measured from the moment the link's reader thread read the bytes of the frame that
confirmed it (the frame's host time: the link stamps every frame of a read with the clock taken right
after that read returned, and the detector's `Touch.t_s` is that frame's time) to the end of the first
screen frame that paints the key's row with its state word `TOUCH` (the Textual compositor's update,
after which a real terminal would be written; the headless driver writes nothing). The debounce the
detector waits for lies before that frame, so it is not counted: this is the screen's own delay.

The probe wraps three calls of the running app, all on the UI thread: `source.poll` (to note each
`Touch` with its frame's time), the channel table's `render_line` (to see which rows a screen frame
paints with `TOUCH`, by their text) and `app._display` (the end of a screen frame). A thread presses
keys of the simulated board at random moments, so touches fall at every phase of the screen timer.
"""

from __future__ import annotations

import heapq
import random
import threading
import time
from collections.abc import Callable, Sequence
from typing import Any

import numpy as np

from processing.detections import Release, Touch


class TouchProbe:
    """Latency of every touch from the read that confirmed it to the screen frame that shows it."""

    def __init__(self, clock: Callable[[], float] = time.monotonic) -> None:
        self.clock = clock
        self.names: list[str] = []
        self.pending: dict[str, float] = {}  # key name -> its Touch's frame time, not painted yet
        self.painted: set[str] = set()  # keys painted with TOUCH in the screen frame being built
        self.latencies_s: list[float] = []
        self.touches = 0
        self.unseen = 0  # touches released before any screen frame showed them

    def attach(self, app: Any, source: Any, table: Any, watch: Sequence[str]) -> None:
        """Wrap the app's calls; only touches of the keys in `watch` (those on screen) are timed."""
        self.names = list(source.channel_names())
        watched = set(watch)
        poll, render_line, display = source.poll, table.render_line, app._display

        def probe_poll() -> Any:
            tick = poll()
            for det in tick.detections:
                if not isinstance(det, (Touch, Release)) or self.names[det.channel] not in watched:
                    continue
                name = self.names[det.channel]
                if isinstance(det, Touch):
                    self.touches += 1
                    self.pending[name] = det.t_s
                elif self.pending.pop(name, None) is not None:
                    self.unseen += 1
            return tick

        def probe_line(y: int) -> Any:
            strip = render_line(y)
            if self.pending and y > 0:
                text = strip.text
                if "TOUCH" in text:
                    self.painted.add(text[2:].split(maxsplit=1)[0])  # after the cursor and mark cells
            return strip

        def probe_display(screen: Any, update: Any) -> None:
            display(screen, update)
            if self.painted:
                now = self.clock()
                for name in self.painted:
                    t_s = self.pending.pop(name, None)
                    if t_s is not None:
                        self.latencies_s.append(now - t_s)
                self.painted.clear()

        source.poll, table.render_line, app._display = probe_poll, probe_line, probe_display

    def summary(self) -> dict[str, float]:
        ms = np.array(self.latencies_s) * 1000.0
        if not len(ms):
            return {"shown": 0, "touches": self.touches, "unseen": self.unseen}
        return {"shown": len(ms), "touches": self.touches, "unseen": self.unseen,
                "median_ms": float(np.median(ms)), "p95_ms": float(np.percentile(ms, 95)),
                "max_ms": float(ms.max())}


class Presser(threading.Thread):
    """Presses keys of a simulated board (`+KEY` / `-KEY` through the link) at random moments.

    A new key goes down every 60-140 ms and is held 200-350 ms, so two to four keys are down at once
    and touches land at every phase of the screen timer.
    """

    def __init__(self, write: Callable[[bytes], object], names: Sequence[str], seconds: float,
                 seed: int = 7) -> None:
        super().__init__(daemon=True, name="presser")
        self.write, self.names, self.seconds = write, list(names), seconds
        self.rng = random.Random(seed)
        self.stop_event = threading.Event()
        self.pressed = 0

    def run(self) -> None:
        end = time.monotonic() + self.seconds
        releases: list[tuple[float, str]] = []
        held: set[str] = set()
        next_press = time.monotonic()
        while not self.stop_event.is_set():
            now = time.monotonic()
            while releases and releases[0][0] <= now:
                _, name = heapq.heappop(releases)
                self.write(f"-{name}\n".encode("ascii"))
                held.discard(name)
            if now >= end and not releases:
                return
            if now >= next_press and now < end:
                free = [n for n in self.names if n not in held]
                if free:
                    name = self.rng.choice(free)
                    self.write(f"+{name}\n".encode("ascii"))
                    held.add(name)
                    self.pressed += 1
                    heapq.heappush(releases, (now + self.rng.uniform(0.20, 0.35), name))
                next_press = now + self.rng.uniform(0.06, 0.14)
            wake = min([next_press] + [r[0] for r in releases[:1]])
            self.stop_event.wait(max(0.0005, wake - time.monotonic()))
