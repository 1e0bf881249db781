"""Running `padtune monitor PORT --json` as a subprocess against a played board, as a user would.

`run_scenario` starts the board's wire, then `padtune monitor URL --json` (plus the scenario's own
arguments), waits until padtune reports the port open (`connected`: after the open, so after pyserial's
flush of the input buffer), then lets the board print from its frame 0. A scenario without a duration
ends when the board has printed its last line and padtune has read it all: then SIGTERM, which ends
`monitor` with its summary. Nothing here sleeps and hopes: every wait has a condition and a deadline.

`Outcome` is what a user sees: the JSON Lines, the stderr lines, the exit code; and what the board saw:
the frames it wrote whole, the `?` lines the host sent.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import threading
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from tests.acceptance.boards import RAMP_FRAMES, Board, Touch
from tests.acceptance.wire import Player, make_wire

ROOT = Path(__file__).resolve().parents[2]
WAIT_S = 60.0  # generous: 2 shared cores, several runs at once

# The window a detection may fall in, in frames after the finger starts landing (touch) or lifting
# (release). The contract fixes neither the provisional debounce nor the ramp a detector needs: a finger
# reaches full depth within RAMP_FRAMES, the debounce is taken as the default 3 frames (processing/
# settings.py; a provisional rule may keep it), and 2 frames of slack cover a threshold crossed on the
# ramp's last step. A detection outside [start, start + LATE_FRAMES] is on the wrong frame.
DEBOUNCE_FRAMES = 3
LATE_FRAMES = RAMP_FRAMES + DEBOUNCE_FRAMES + 2


@dataclass(frozen=True)
class Scenario:
    name: str
    board: Board | None = None
    wire: str = "pty"  # pty, socket, rfc2217; or none with `url`
    url: str | None = None
    args: tuple[str, ...] = ()
    duration_s: float | None = None  # None: until the board is done (then SIGTERM)
    learns: bool = True  # no polarity from an info line, --polarity or a profile: each key learns it
    profile: Callable[[Path], Path] | None = None  # writes a profile, returns its path


@dataclass
class Outcome:
    scenario: Scenario
    returncode: int | None
    events: list[dict[str, Any]]
    stderr: list[str]
    player: Player | None
    connected_at: float | None
    url: str
    timed_out: str = ""
    bad_lines: list[str] = field(default_factory=list)

    # --- what the user sees ---------------------------------------------------------------------
    def of(self, kind: str) -> list[dict[str, Any]]:
        return [e for e in self.events if e.get("type") == kind]

    def links(self, event: str) -> list[dict[str, Any]]:
        return [e for e in self.of("link") if e.get("event") == event]

    @property
    def summary(self) -> dict[str, Any]:
        found = self.of("summary")
        assert found, f"{self.scenario.name}: no summary; {self.describe()}"
        return found[-1]

    def hellos(self) -> list[dict[str, Any]]:
        return self.of("hello")

    def detections(self, kind: str, channel: str) -> list[int]:
        return [e["index"] for e in self.of(kind) if e.get("channel") == channel]

    def stderr_with(self, *words: str) -> list[str]:
        return [line for line in self.stderr if all(w.lower() in line.lower() for w in words)]

    def describe(self) -> str:
        """Enough of the run to see why a check failed."""
        kinds: dict[str, int] = {}
        for e in self.events:
            key = e.get("type", "?") + (":" + str(e.get("event")) if e.get("type") == "link" else "")
            kinds[key] = kinds.get(key, 0) + 1
        board = ""
        if self.player is not None:
            board = (f"; board wrote {self.player.sent} frames, host lines {self.player.host_lines[:5]}, "
                     f"board error {self.player.error!r}")
        return (f"exit {self.returncode} {self.timed_out}; events {kinds}; stderr {self.stderr[-8:]}{board}"
                f"; unparsed stdout {self.bad_lines[:3]}")

    # --- frames ---------------------------------------------------------------------------------
    def first_frame(self) -> int:
        """The board frame that padtune counted as its frame 0. A board that starts at the open: 0. A
        board already running: the last `frames` it wrote whole are those padtune read (its open flushed
        or cut the ones before), so frame 0 is the first of those."""
        assert self.player is not None
        if not self.scenario.board or not self.scenario.board.running:
            return 0
        frames = self.summary["frames"]
        written = self.player.written
        assert 0 < frames <= len(written), f"padtune read {frames} frames of {len(written)} written"
        return written[len(written) - frames]

    def index(self, board_frame: int) -> int:
        return board_frame - self.first_frame()

    def reported_touches(self) -> list[Touch]:
        """The touches a user expects to see reported: all, less each key's first one when the key has to
        learn its polarity from it (contract 6: the teaching touch is not reported). A running board's
        touches are anchored at the frame it received `?` (the Player shifted them)."""
        assert self.player is not None
        touches = self.player.board.touches
        if not self.scenario.learns:
            return list(touches)
        seen: set[int] = set()
        out = []
        for t in touches:
            if t.key in seen:
                out.append(t)
            seen.add(t.key)
        return out

    def teaching_touches(self) -> list[Touch]:
        assert self.player is not None
        reported = self.reported_touches()
        return [t for t in self.player.board.touches if t not in reported]


class _Lines(threading.Thread):
    """Collects a child's output lines in a thread (never blocks the test on a pipe)."""

    def __init__(self, stream) -> None:
        super().__init__(daemon=True)
        self.stream = stream
        self.lines: list[str] = []

    def run(self) -> None:
        for line in self.stream:
            self.lines.append(line.rstrip("\n"))


def _wait(condition: Callable[[], bool], timeout_s: float) -> bool:
    deadline = time.monotonic() + timeout_s
    while not condition():
        if time.monotonic() > deadline:
            return False
        time.sleep(0.01)
    return True


def _drained(player: Player) -> None:
    """Wait until the host has read every byte the board wrote (pty: TIOCINQ of the slave is 0), then a
    moment for its decoder and queue; over a network the host's queue is not visible: a second."""
    unread = player.wire.unread
    if unread() is None:
        time.sleep(1.0)
        return
    _wait(lambda: unread() == 0, WAIT_S)
    time.sleep(0.3 if player.wire.kind == "pty" else 1.0)


def padtune_cmd(*args: str) -> list[str]:
    return [sys.executable, "-m", "tui.cli", *args]


def run_scenario(sc: Scenario, folder: Path) -> Outcome:
    wire = player = None
    if sc.board is not None:
        wire = make_wire(sc.wire)
        player = Player(sc.board, wire)
        player.start()
    url = wire.url if wire is not None else str(sc.url)
    args = list(sc.args)
    if sc.profile is not None:
        args += ["--profile", str(sc.profile(folder))]
    if sc.duration_s is not None:
        args += ["--duration", str(sc.duration_s)]
    env = {**os.environ, "NO_COLOR": "1", "COLUMNS": "200"}
    proc = subprocess.Popen(padtune_cmd("monitor", url, "--json", *args), cwd=ROOT, env=env, text=True,
                            stdin=subprocess.DEVNULL, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    out, err = _Lines(proc.stdout), _Lines(proc.stderr)
    out.start()
    err.start()
    connected_at = None
    timed_out = ""
    try:
        if _wait(lambda: any('"event":"connected"' in x for x in out.lines) or proc.poll() is not None,
                 WAIT_S) and proc.poll() is None:
            connected_at = time.monotonic()
        if player is not None and connected_at is not None:
            player.opened_at = connected_at
            player.go.set()
        if sc.duration_s is not None or player is None or connected_at is None:
            try:
                proc.wait(WAIT_S + (sc.duration_s or 0))
            except subprocess.TimeoutExpired:
                timed_out = "padtune did not end after its --duration"
        else:
            if not _wait(player.finished.is_set, WAIT_S + sc.board.frames / sc.board.rate_hz):
                timed_out = "the board did not finish"
            _drained(player)
            proc.send_signal(signal.SIGTERM)
            try:
                proc.wait(WAIT_S)
            except subprocess.TimeoutExpired:
                timed_out = "padtune did not end on SIGTERM"
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait(10)
        if player is not None:
            player.stop()
        out.join(10)
        err.join(10)
        if wire is not None:
            wire.close()
    events, bad = [], []
    for line in out.lines:
        try:
            events.append(json.loads(line))
        except json.JSONDecodeError:
            bad.append(line)
    return Outcome(sc, proc.returncode, events, err.lines, player, connected_at, url, timed_out, bad)


def run_cli(*args: str, timeout_s: float = WAIT_S) -> subprocess.CompletedProcess:
    env = {**os.environ, "NO_COLOR": "1", "COLUMNS": "200"}
    return subprocess.run(padtune_cmd(*args), cwd=ROOT, env=env, capture_output=True, text=True,
                          timeout=timeout_s, stdin=subprocess.DEVNULL)


def in_window(index: int, start: int) -> bool:
    return start <= index <= start + LATE_FRAMES


def check_keys(o: Outcome, names: Sequence[str]) -> list[str]:
    """Every problem with the touches and releases on the board's keys, as readable lines: each reported
    touch and its release on the right key (by `names`) in its window, nothing else on any key (no touch at
    a teaching touch, no phantom touch at a lift). Empty when all is right."""
    problems = []
    expected = o.reported_touches()
    for key, name in enumerate(names):
        mine = [t for t in expected if t.key == key]
        touches = o.detections("touch", name)
        releases = o.detections("release", name)
        want_t = [o.index(t.start) for t in mine]
        want_r = [o.index(t.end) for t in mine]
        ok = (len(touches) == len(mine) == len(releases)
              and all(in_window(i, s) for i, s in zip(touches, want_t, strict=True))
              and all(in_window(i, s) for i, s in zip(releases, want_r, strict=True)))
        if not ok:
            problems.append(f"{name}: touches at {touches}, releases at {releases}; expected a touch in "
                            f"[s, s+{LATE_FRAMES}] for s in {want_t} and a release likewise for {want_r}")
    other = {e.get("channel") for e in o.of("touch") + o.of("release")} - set(names)
    if other:
        problems.append(f"touches or releases on keys the board does not have: {sorted(map(str, other))}")
    return problems
